// The scan of samples/ must equal samples/EXPECTED.md both ways: missed and spurious findings listed separately.
import { expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../server/src/engine/engine';
import { toCell } from '../../server/src/engine/source';
import { RULES } from '../../rules/index';
import { loadTree } from '../../server/src/cli/load';
import { parser } from '../helpers/rule-tester';

const root = path.join(__dirname, '..', '..');

function expected(): string[] {
  const text = fs.readFileSync(path.join(root, 'samples', 'EXPECTED.md'), 'utf8');
  const out: string[] = [];
  for (const line of text.split('\n')) {
    const m = /^- (samples\/\S+?):((?:cell \d+:line \d+)|\d+) → ([a-z0-9-]+)/.exec(line);
    if (m) out.push(`${m[1]}:${m[2]} → ${m[3]}`);
  }
  return out.sort();
}

test('scan of samples/ equals samples/EXPECTED.md', async () => {
  const e = new Engine(await parser(), RULES);
  const tree = loadTree(e, root, [path.join(root, 'samples')]);
  const implemented = new Set(RULES.map((r) => r.meta.id));
  const found = e.analyze(tree.sources).map((f) => {
    const file = e.ws.get(f.path)!.source;
    const cell = toCell(file, f.span.line, f.span.col);
    return `${f.path}:${cell ? `cell ${cell.cell + 1}:line ${cell.line + 1}` : f.span.line + 1} → ${f.rule}`;
  });
  const want = expected();
  expect(want.length).toBeGreaterThan(20);
  // every expected rule exists, and every registered rule is planted at least once
  expect(want.map((w) => w.split(' → ')[1]).filter((r) => !implemented.has(r))).toEqual([]);
  expect([...implemented].filter((r) => !want.some((w) => w.endsWith(` → ${r}`)))).toEqual([]);
  const missed = want.filter((w) => !found.includes(w));
  const spurious = [...new Set(found)].filter((f) => !want.includes(f)).sort();
  expect({ missed, spurious }).toEqual({ missed: [], spurious: [] });
});
