// Baselines (tolerate recorded findings, survive line shifts, fail on new ones) and --changed-since on a real git repository.
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { buildCli, cleanBuild, git, parseReport, regwise, tempDir, where, writeTree, biasModel } from './helpers';

beforeAll(async () => {
  await buildCli();
});
afterAll(() => cleanBuild());

function repo(files: Record<string, string>): string {
  const dir = tempDir('regwise-git-');
  git(dir, 'init', '-q', '-b', 'main');
  writeTree(dir, files);
  git(dir, 'add', '-A');
  git(dir, 'commit', '-q', '-m', 'start');
  return dir;
}

describe('baseline', () => {
  test('recorded findings are tolerated after lines shift; a new one fails; the file has no line numbers', () => {
    const dir = repo({ 'models/net.py': biasModel(), 'models/other.py': biasModel('Other', 16) });
    const w = regwise(['scan', '--write-baseline', 'regwise-baseline.json'], dir);
    expect(w.stderr).toContain('wrote 2 findings to the baseline regwise-baseline.json');
    expect(w.code).toBe(0);
    const base = JSON.parse(fs.readFileSync(path.join(dir, 'regwise-baseline.json'), 'utf8'));
    expect(base.version).toBe(1);
    expect(base.findings.map((e: { rule: string; path: string }) => `${e.path} ${e.rule}`)).toEqual(['models/net.py bias-before-norm', 'models/other.py bias-before-norm']);
    expect(JSON.stringify(base)).not.toMatch(/"line"|"column"|"start"/);

    // shift every line of net.py down and re-indent nothing else: still known
    const shifted = `"""Trap model."""\nimport os\n\n\n${biasModel()}`;
    fs.writeFileSync(path.join(dir, 'models/net.py'), shifted);
    const known = regwise(['scan', '--baseline', 'regwise-baseline.json', '--format', 'json'], dir);
    expect(parseReport(known.stdout).findings).toEqual([]);
    expect(parseReport(known.stdout).summary.baselined).toBe(2);
    expect(known.code).toBe(0);

    // a new mistake (a second model) is reported and fails the job; the old ones stay tolerated
    fs.writeFileSync(path.join(dir, 'models/net.py'), `${shifted}\n\n${biasModel('Second', 32).replace('import torch.nn as nn\n', '')}`);
    const fresh = regwise(['scan', '--baseline', 'regwise-baseline.json', '--format', 'json'], dir);
    expect(where(parseReport(fresh.stdout).findings)).toEqual(['models/net.py:23 bias-before-norm']);
    expect(fresh.code).toBe(1);

    // the baseline's paths are relative to the baseline file: it works from a subfolder too
    const sub = regwise(['scan', '.', '--baseline', '../regwise-baseline.json', '--format', 'json'], path.join(dir, 'models'));
    expect(where(parseReport(sub.stdout).findings)).toEqual(['net.py:23 bias-before-norm']);
  });

  test('changing the flagged code makes the finding new again', () => {
    const dir = repo({ 'net.py': biasModel() });
    regwise(['scan', '--write-baseline', 'b.json'], dir);
    fs.writeFileSync(path.join(dir, 'net.py'), biasModel().replace('nn.Conv2d(3, 8, 3)', 'nn.Conv2d(3, 8, 5)'));
    const r = regwise(['scan', '--baseline', 'b.json', '--format', 'json'], dir);
    expect(where(parseReport(r.stdout).findings)).toEqual(['net.py:7 bias-before-norm']);
  });

  test('an invalid baseline file is a usage error', () => {
    const dir = repo({ 'net.py': biasModel() });
    fs.writeFileSync(path.join(dir, 'b.json'), '{"findings": 3}');
    const r = regwise(['scan', '--baseline', 'b.json'], dir);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/b\.json: not a regwise baseline/);
  });

  test('SARIF fingerprints do not move when lines shift', () => {
    const dir = repo({ 'net.py': biasModel() });
    const fp = () => JSON.parse(regwise(['scan', '--format', 'sarif'], dir).stdout).runs[0].results.map((r: { partialFingerprints: Record<string, string> }) => Object.values(r.partialFingerprints)[0]);
    const before = fp();
    fs.writeFileSync(path.join(dir, 'net.py'), `# header\n\n\n${biasModel()}`);
    expect(fp()).toEqual(before);
    expect(before).toHaveLength(1);
  });
});

describe('--changed-since', () => {
  // layers.py gives the norm that net.py uses: the net.py finding needs layers.py's facts
  const files = {
    'layers.py': `${biasModel('Legacy')}\nNorm = nn.BatchNorm2d\n`,
    'net.py': biasModel().replace('import torch.nn as nn\n', 'import torch.nn as nn\nfrom layers import Norm\n').replace('nn.BatchNorm2d(8)', 'Norm(8)'),
    'untouched.py': biasModel('Untouched'),
  };

  test('reports only files changed since the ref (edited, staged, untracked), with cross-file facts from the rest', () => {
    const dir = repo(files);
    const all = regwise(['scan', '--format', 'json'], dir);
    expect(where(parseReport(all.stdout).findings)).toEqual(['layers.py:7 bias-before-norm', 'net.py:8 bias-before-norm', 'untouched.py:7 bias-before-norm']);
    expect(where(parseReport(regwise(['scan', '--changed-since', 'HEAD', '--format', 'json'], dir).stdout).findings)).toEqual([]);
    fs.appendFileSync(path.join(dir, 'net.py'), '\n# touched\n');
    writeTree(dir, { 'new_model.py': biasModel('Fresh') });
    const r = regwise(['scan', '--changed-since', 'HEAD', '--format', 'json'], dir);
    expect(where(parseReport(r.stdout).findings)).toEqual(['net.py:8 bias-before-norm', 'new_model.py:7 bias-before-norm']);
    git(dir, 'add', '-A');
    git(dir, 'commit', '-q', '-m', 'second');
    // against the first commit (committed changes), from a subfolder path
    const first = git(dir, 'rev-list', '--max-parents=0', 'HEAD').trim();
    expect(where(parseReport(regwise(['scan', '--changed-since', first, '--format', 'json'], dir).stdout).findings)).toEqual(['net.py:8 bias-before-norm', 'new_model.py:7 bias-before-norm']);
  });

  test('--fix with --changed-since fixes only changed files', () => {
    const dir = repo(files);
    fs.appendFileSync(path.join(dir, 'net.py'), '\n# touched\n');
    const r = regwise(['scan', '--changed-since', 'HEAD', '--fix'], dir);
    expect(r.stderr).toContain('regwise: 1 fix applied in 1 file');
    expect(fs.readFileSync(path.join(dir, 'untouched.py'), 'utf8')).toBe(files['untouched.py']);
    expect(fs.readFileSync(path.join(dir, 'net.py'), 'utf8')).toContain('nn.Conv2d(3, 8, 3, bias=False)');
  });

  test('an unknown ref or a folder outside git is an exit-2 error', () => {
    const dir = repo(files);
    const r = regwise(['scan', '--changed-since', 'no-such-ref'], dir);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/git rev-parse .*no-such-ref/);
    const plain = tempDir();
    writeTree(plain, { 'net.py': biasModel() });
    expect(regwise(['scan', '--changed-since', 'HEAD'], plain).code).toBe(2);
  });
});
