// Bad input never crashes the engine: syntax errors, empty and huge files, deep nesting, invalid UTF-8, binaries.
import { describe, expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import fc from 'fast-check';
import { extractFacts } from '../../server/src/engine/facts';
import { editTree } from '../../server/src/engine/parser';
import { lowerModule } from '../../server/src/engine/lower';
import { Engine } from '../../server/src/engine/engine';
import { RULES } from '../../rules/index';
import { loadTree } from '../../server/src/cli/load';
import { parser } from '../helpers/rule-tester';

describe('parser and facts', () => {
  test('a syntax error still yields facts for the valid parts', async () => {
    const p = await parser();
    const text = 'import torch.nn as nn\ndef broken(:\n    pass\nclass Net(nn.Module):\n    def forward(self, x):\n        return x\n';
    const f = extractFacts(p, text);
    expect(f.ir.syntaxErrors.length).toBeGreaterThan(0);
    expect(f.imports.map((i) => `${i.local}=${i.module}`)).toEqual(['nn=torch.nn']);
    expect(f.classes.map((c) => `${c.name}@${c.span.line}`)).toEqual(['Net@3']);
    expect(f.notes[0]).toMatch(/syntax error/);
  });

  test('an empty file', async () => {
    const f = extractFacts(await parser(), '');
    expect(f.ir.body).toEqual([]);
    expect(f.notes).toEqual([]);
  });

  test('imports in every form, calls with positional and keyword arguments, decorators, with items, loops', async () => {
    const text = [
      'import os, torch.nn as nn',
      'from . import sibling',
      'from ..pkg.mod import A as B, C',
      '@torch.no_grad()',
      'def f(model, loader, *args, k=1, **kw):',
      '    with torch.no_grad() as g, open("x") as fh:',
      '        for xb, yb in loader:',
      '            model(xb, k, scale=2)',
    ].join('\n');
    const f = extractFacts(await parser(), text);
    expect(f.imports.map((i) => `${i.local}<-${'.'.repeat(i.level)}${i.module}${i.member ? `:${i.member}` : ''}@${i.span.line}`)).toEqual([
      'os<-os@0', 'nn<-torch.nn@0', 'sibling<-.:sibling@1', 'B<-..pkg.mod:A@2', 'C<-..pkg.mod:C@2',
    ]);
    const def = f.functions[0];
    expect(def.decorators.length).toBe(1);
    expect(def.params.map((x) => `${x.kind}:${x.name}`)).toEqual(['normal:model', 'normal:loader', 'star:args', 'kwonly:k', 'kwstar:kw']);
    const w = def.body[0];
    expect(w.k).toBe('with');
    if (w.k !== 'with') return;
    expect(w.items.map((i) => i.target?.k)).toEqual(['name', 'name']);
    expect(w.body[0].k).toBe('for');
    const call = f.calls.find((c) => c.callee === 'model')!;
    expect([call.positional, call.keywords, call.call.span.line, call.call.span.col]).toEqual([2, ['scale'], 7, 12]);
  });

  test('a 10,000-deep nested expression returns without a stack overflow', async () => {
    const text = `x = ${'('.repeat(10000)}1${')'.repeat(10000)}\ny = [${'['.repeat(5000)}${']'.repeat(5000)}]\n`;
    const f = extractFacts(await parser(), text);
    expect(f.ir.body.length).toBeGreaterThanOrEqual(1);
    const e = new Engine(await parser(), RULES);
    e.setFile('deep.py', text);
    expect(() => e.analyze()).not.toThrow();
  });

  test('a 5 MB file is skipped by the loader with a reason; a large valid file is analysed', async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-big-'));
    fs.writeFileSync(path.join(dir, 'huge.py'), `x = 1\n`.repeat(900_000));
    fs.writeFileSync(path.join(dir, 'bin.py'), Buffer.from([0x00, 0x01, 0x02, 0xff, 0x00]));
    fs.writeFileSync(path.join(dir, 'latin.py'), Buffer.from([0x78, 0x20, 0x3d, 0x20, 0x27, 0xe9, 0x27, 0x0a]));
    const e = new Engine(await parser(), RULES);
    const t = loadTree(e, dir, [dir]);
    expect(t.skipped.map((s) => `${s.path}: ${s.reason.split(' (')[0]}`).sort()).toEqual(['bin.py: binary content', 'huge.py: larger than 5 MB']);
    expect(t.sources).toEqual(['latin.py']);
    expect(() => e.analyze()).not.toThrow();
    const big = 'import torch.nn as nn\n' + 'x = nn.Conv2d(3, 8, 3)\n'.repeat(200_000);
    const f = extractFacts(await parser(), big);
    expect(f.ir.body.length).toBe(200_001);
  });
});

describe('incremental reparse', () => {
  test('tree.edit + reparse gives the same IR as a fresh parse', async () => {
    const p = await parser();
    const before = 'import torch.nn as nn\nclass M(nn.Module):\n    def __init__(self):\n        self.bn = nn.BatchNorm2d(8)\n';
    const tree = p.parse(before);
    const at = before.indexOf('8)');
    const after = editTree(tree, before, [{ start: at, end: at + 1, newText: '16' }]);
    const re = p.parse(after, tree);
    expect(after).toContain('BatchNorm2d(16)');
    expect(JSON.stringify(lowerModule(re))).toBe(JSON.stringify(lowerModule(p.parse(after))));
  });
});

describe('property: extraction and analysis never throw under random edits of the samples', () => {
  const samples = fs.readdirSync(path.join(__dirname, '..', '..', 'samples'), { recursive: true })
    .map(String).filter((f) => f.endsWith('.py')).map((f) => fs.readFileSync(path.join(__dirname, '..', '..', 'samples', f), 'utf8'));

  test('random splices', async () => {
    const p = await parser();
    expect(samples.length).toBeGreaterThan(0);
    await fc.assert(
      fc.property(fc.nat(samples.length - 1), fc.nat(), fc.nat(40), fc.string({ maxLength: 12 }), (which, pos, del, insert) => {
        const src = samples[which];
        const at = pos % (src.length + 1);
        const text = src.slice(0, at) + insert + src.slice(Math.min(src.length, at + del));
        const e = new Engine(p, RULES);
        e.setFile('s.py', text);
        e.analyze();
        return true;
      }),
      { numRuns: 60, seed: 20261201 },
    );
  });
});
