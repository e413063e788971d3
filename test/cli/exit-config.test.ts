// Exit codes (0/1/2 with --fail-level), usage and config errors, config discovery, levels, include/exclude, the walk.
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { buildCli, cleanBuild, parseReport, regwise, tempDir, where, writeTree, biasModel } from './helpers';
import { main } from '../../server/src/cli/main';
import { engineOptions, loadConfig, nearest } from '../../server/src/cli/config';
import { RULES } from '../../rules/index';
import { defineRule, type Rule } from '../../server/src/engine/rule';

beforeAll(async () => {
  await buildCli();
});
afterAll(() => cleanBuild());

describe('exit codes', () => {
  const dir = tempDir();
  writeTree(dir, { 'net.py': biasModel() }); // one warning

  test.each([
    ['warning', 1],
    ['info', 1],
    ['error', 0],
    ['never', 0],
  ])('--fail-level %s with a warning → %i', (level, code) => {
    expect(regwise(['scan', '--fail-level', level], dir).code).toBe(code);
  });

  test('default fail level is warning; a clean tree exits 0', () => {
    expect(regwise(['scan'], dir).code).toBe(1);
    const clean = tempDir();
    writeTree(clean, { 'ok.py': 'import torch.nn as nn\nx = nn.Conv2d(3, 8, 3, bias=False)\n' });
    expect(regwise(['scan'], clean).code).toBe(0);
  });

  test('a level raised by config makes --fail-level error fail', () => {
    const d = tempDir();
    writeTree(d, { 'net.py': biasModel(), 'regwise.toml': '[levels]\nbias-before-norm = "error"\n' });
    const r = regwise(['scan', '--fail-level', 'error', '--format', 'json'], d);
    expect(r.code).toBe(1);
    expect(parseReport(r.stdout).findings.map((f) => f.level)).toEqual(['error']);
  });

  test.each([
    [['scan', '--format', 'xml'], /--format must be one of text, json, sarif/],
    [['scan', '--fail-levle', 'error'], /unknown option --fail-levle \(did you mean --fail-level\?\)/],
    [['scan', 'no/such/dir'], /no such file or folder: no\/such\/dir/],
    [['scan', '--jobs', '0'], /--jobs must be a positive whole number/],
    [['scan', '--output'], /--output needs a value/],
    [['frobnicate'], /unknown command 'frobnicate'/],
    [['explain', 'no-such-rule'], /unknown rule 'no-such-rule'/],
    [['scan', '--baseline', 'missing.json'], /missing\.json: cannot read baseline/],
  ])('usage error %j → exit 2', (args, message) => {
    const r = regwise(args as string[], dir);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(message as RegExp);
  });

  test('a rule that throws becomes one internal finding naming the rule; the other rules still report', async () => {
    const boom = defineRule({
      meta: { id: 'always-throws', title: 't', family: 'model', level: 'warning', frameworks: ['pytorch'], summary: 's', fix: 'none', sources: [], messages: { m: 'm' } },
      check() {
        throw new Error('kaboom');
      },
    }) as unknown as Rule;
    const list = RULES as Rule[];
    list.push(boom);
    const cwd = process.cwd();
    let out = '';
    let code: number;
    try {
      process.chdir(dir);
      code = await main(['scan', '--format', 'json', '--jobs', '1'], { out: (s) => (out += s), err: () => {}, env: {} });
    } finally {
      process.chdir(cwd);
      list.splice(list.indexOf(boom), 1);
    }
    const j = parseReport(out);
    expect(code).toBe(1);
    expect(where(j.findings)).toEqual(['net.py:1 internal-error', 'net.py:7 bias-before-norm']);
    expect(j.findings[0].message).toContain('always-throws');
    expect(j.findings[0].message).toContain('kaboom');
  });
});

describe('config', () => {
  const ids = RULES.map((r) => r.meta.id);

  test.each([
    ['regwise.toml', 'include = ["src"]\nexclud = ["tests"]\n', /regwise\.toml:2: unknown key 'exclud'; valid: include, exclude, levels, thresholds \(did you mean 'exclude'\?\)/],
    ['regwise.toml', '[levels]\nbias-befor-norm = "off"\n', /regwise\.toml:2: unknown rule id 'bias-befor-norm'; valid: .*bias-before-norm.* \(did you mean 'bias-before-norm'\?\)/],
    ['regwise.toml', '[levels]\nbias-before-norm = "warn"\n', /regwise\.toml:2: level of 'bias-before-norm' must be one of off, hint, info, warning, error \(got "warn"\) \(did you mean 'warning'\?\)/],
    ['regwise.toml', '[thresholds]\nmin-batch-per-device = 0\n', /regwise\.toml:2: 'min-batch-per-device' must be a positive integer \(got 0\)/],
    ['regwise.toml', '[thresholds]\nmin-batch-per-devices = 8\n', /regwise\.toml:2: unknown threshold 'min-batch-per-devices'; valid: min-batch-per-device, devices-per-process, suspicious-drop-rate \(did you mean 'min-batch-per-device'\?\)/],
    ['regwise.toml', 'include = "src"\n', /regwise\.toml:1: 'include' must be a list of path patterns/],
    ['regwise.toml', '[levels]\nbias-before-norm = \n', /regwise\.toml:2: invalid TOML/],
    ['pyproject.toml', '[project]\nname = "x"\n\n[tool.regwise]\nexclude = []\nlevel = {}\n', /pyproject\.toml:6: unknown key 'tool\.regwise\.level'.*\(did you mean 'levels'\?\)/],
  ])('%s with a mistake → exit 2 naming the file and line', (file, text, message) => {
    const d = tempDir();
    writeTree(d, { 'net.py': biasModel(), [file]: text });
    const r = regwise(['scan'], d);
    expect(r.stderr).toMatch(message);
    expect(r.code).toBe(2);
  });

  test('levels and thresholds reach the engine options', () => {
    const d = tempDir();
    writeTree(d, { 'regwise.toml': '[levels]\nbias-before-norm = "off"\n\n[thresholds]\nmin-batch-per-device = 8\ndevices-per-process = 4\nsuspicious-drop-rate = 0.7\n' });
    expect(engineOptions(loadConfig(path.join(d, 'regwise.toml'), ids))).toEqual({
      levels: { 'bias-before-norm': 'off' },
      thresholds: { minBatchPerDevice: 8, devicesPerProcess: 4, suspiciousDropRate: 0.7 },
    });
  });

  test('a level of off silences the rule; pyproject [tool.regwise] is found from a subfolder', () => {
    const d = tempDir();
    writeTree(d, { 'pkg/net.py': biasModel(), 'pyproject.toml': '[tool.regwise.levels]\nbias-before-norm = "off"\n' });
    expect(regwise(['scan', '--format', 'json'], path.join(d, 'pkg')).stdout).toContain('"findings": []');
    expect(where(parseReport(regwise(['scan', '--format', 'json'], d).stdout).findings)).toEqual([]);
  });

  test('regwise.toml wins over pyproject.toml; --config overrides discovery', () => {
    const d = tempDir();
    writeTree(d, {
      'net.py': biasModel(),
      'pyproject.toml': '[tool.regwise.levels]\nbias-before-norm = "off"\n',
      'regwise.toml': '[levels]\nbias-before-norm = "info"\n',
      'strict.toml': '[levels]\nbias-before-norm = "error"\n',
    });
    expect(parseReport(regwise(['scan', '--format', 'json'], d).stdout).findings.map((f) => f.level)).toEqual(['info']);
    expect(parseReport(regwise(['scan', '--format', 'json', '--config', 'strict.toml'], d).stdout).findings.map((f) => f.level)).toEqual(['error']);
    expect(regwise(['scan', '--config', 'nope.toml'], d).code).toBe(2);
  });

  test('include and exclude (gitignore patterns, relative to the config file)', () => {
    const d = tempDir();
    writeTree(d, {
      'regwise.toml': 'include = ["src/", "tools/*.py"]\nexclude = ["src/legacy/"]\n',
      'src/a.py': biasModel('A'),
      'src/legacy/b.py': biasModel('B'),
      'tools/c.py': biasModel('C'),
      'scratch/d.py': biasModel('D'),
    });
    expect(where(parseReport(regwise(['scan', '--format', 'json'], d).stdout).findings)).toEqual(['src/a.py:7 bias-before-norm', 'tools/c.py:7 bias-before-norm']);
  });

  test('nearest match suggests only plausible typos', () => {
    expect(nearest('exlude', ['include', 'exclude'])).toBe('exclude');
    expect(nearest('zzzzzz', ['include', 'exclude'])).toBeUndefined();
  });
});

describe('walking the tree', () => {
  test('.gitignore files are honoured (nested ones too, with re-includes); a file named on the command line is scanned', () => {
    const d = tempDir();
    fs.mkdirSync(path.join(d, '.git'));
    writeTree(d, {
      '.gitignore': 'build/\n*_gen.py\n',
      'build/a.py': biasModel('A'),
      'model_gen.py': biasModel('G'),
      'sub/.gitignore': '!keep_gen.py\nlocal.py\n',
      'sub/keep_gen.py': biasModel('K'),
      'sub/local.py': biasModel('L'),
      'net.py': biasModel(),
    });
    expect(where(parseReport(regwise(['scan', '--format', 'json'], d).stdout).findings)).toEqual(['net.py:7 bias-before-norm', 'sub/keep_gen.py:7 bias-before-norm']);
    // the repository's .gitignore applies when scanning a subfolder as well
    expect(where(parseReport(regwise(['scan', 'sub', '--format', 'json'], d).stdout).findings)).toEqual(['sub/keep_gen.py:7 bias-before-norm']);
    expect(where(parseReport(regwise(['scan', 'model_gen.py', '--format', 'json'], d).stdout).findings)).toEqual(['model_gen.py:7 bias-before-norm']);
    // a folder git ignores is still scanned when named; the .gitignore files inside it still apply
    writeTree(d, { 'build/.gitignore': 'skip.py\n', 'build/skip.py': biasModel('S') });
    expect(where(parseReport(regwise(['scan', 'build', '--format', 'json'], d).stdout).findings)).toEqual(['build/a.py:7 bias-before-norm']);
  });

  test('symlink loops end; links that leave the roots are not followed; links inside them are read once', () => {
    const d = tempDir();
    const outside = tempDir();
    writeTree(outside, { 'far.py': biasModel('Far') });
    writeTree(d, { 'proj/net.py': biasModel() });
    fs.symlinkSync(path.join(d, 'proj'), path.join(d, 'proj', 'loop'));
    fs.symlinkSync(outside, path.join(d, 'proj', 'escape'));
    fs.symlinkSync(path.join(d, 'proj', 'net.py'), path.join(d, 'proj', 'alias.py'));
    const r = regwise(['scan', 'proj', '--format', 'json'], d);
    expect(r.code).toBe(1);
    expect(where(parseReport(r.stdout).findings)).toEqual(['proj/net.py:7 bias-before-norm']);
  });
});

describe('rules and explain', () => {
  test('`regwise rules` lists every registered rule with its level, family and fix kind', () => {
    const r = regwise(['rules'], tempDir());
    expect(r.code).toBe(0);
    const rows = r.stdout.trim().split('\n').slice(1).map((l) => l.trim().split(/\s+/));
    expect(rows.map((x) => x[0])).toEqual(RULES.map((x) => x.meta.id));
    for (const [id, level, family, fix] of rows) {
      const m = RULES.find((x) => x.meta.id === id)!.meta;
      expect([level, family, fix]).toEqual([m.level, m.family, m.fix]);
    }
  });

  test('`regwise explain RULE` prints the rule page (or its summary)', () => {
    const r = regwise(['explain', 'bias-before-norm'], tempDir());
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/bias/i);
    expect(r.stdout.length).toBeGreaterThan(40);
  });
});
