// The report formats on the real samples and on small fixtures: JSON against its schema, SARIF by the multitool, text layout.
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import Ajv from 'ajv';
import Ajv2020 from 'ajv/dist/2020';
import { ROOT, buildCli, cleanBuild, parseReport, regwise, tempDir, where, writeTree, biasModel, type JsonFinding } from './helpers';
import { NOTEBOOK_CELLS, notebook } from './fixtures';
import { main } from '../../server/src/cli/main';
import { Progress } from '../../server/src/cli/progress';
import { collect, walk } from '../../server/src/cli/load';

beforeAll(async () => {
  await buildCli();
});
afterAll(() => cleanBuild());

const MULTITOOL_DIR = path.join(ROOT, 'node_modules', '@microsoft', 'sarif-multitool-linux');

function uriFormat(ajv: { addFormat(name: string, re: RegExp): unknown }) {
  ajv.addFormat('uri', /^[a-z][a-z0-9+.-]*:[^\s]*$/i);
  ajv.addFormat('uri-reference', /^[^\s]*$/);
  ajv.addFormat('date-time', /^\d{4}-\d\d-\d\dT/);
  ajv.addFormat('uuid', /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i);
}

function reportValidator() {
  const ajv = new Ajv({ allErrors: true, strict: true });
  uriFormat(ajv);
  return ajv.compile(JSON.parse(fs.readFileSync(path.join(ROOT, 'docs', 'report.schema.json'), 'utf8')));
}

/** Runs `sarif-multitool validate` (the binary's run bit is set by an install step CI may not run: set it here). */
function multitoolValidate(file: string): { level: string; ruleId: string; message: unknown }[] {
  const bin = path.join(MULTITOOL_DIR, 'Sarif.Multitool');
  fs.chmodSync(bin, 0o755);
  const out = `${file}.validation.sarif`;
  fs.rmSync(out, { force: true });
  const r = spawnSync(bin, ['validate', file, '-o', out, '--level', 'Error', 'Warning', 'Note'], { encoding: 'utf8', env: { ...process.env, DOTNET_CLI_TELEMETRY_OPTOUT: '1' } });
  expect(r.status, r.stdout + r.stderr).toBe(0);
  const log = JSON.parse(fs.readFileSync(out, 'utf8'));
  return log.runs[0].results.map((x: { level: string; ruleId: string; message: unknown }) => ({ level: x.level, ruleId: x.ruleId, message: x.message }));
}

describe('the samples scan', () => {
  let json: ReturnType<typeof parseReport>;
  let sarifFile: string;
  let text: string;
  const out = tempDir('regwise-formats-');

  beforeAll(() => {
    const j = regwise(['scan', 'samples', '--format', 'json', '--fail-level', 'never'], ROOT);
    expect(j.code, j.stderr).toBe(0);
    json = parseReport(j.stdout);
    sarifFile = path.join(out, 'samples.sarif');
    const s = regwise(['scan', 'samples', '--format', 'sarif', '--output', sarifFile, '--fail-level', 'never'], ROOT);
    expect(s.code, s.stderr).toBe(0);
    expect(s.stdout).toBe('');
    text = regwise(['scan', 'samples', '--fail-level', 'never'], ROOT).stdout;
  });

  test('JSON report is valid against docs/report.schema.json', () => {
    const validate = reportValidator();
    const ok = validate(json);
    expect(validate.errors ?? []).toEqual([]);
    expect(ok).toBe(true);
    expect(json.findings.length).toBeGreaterThan(0);
  });

  test('the schema rejects a report that breaks it (the check can fail)', () => {
    const validate = reportValidator();
    const broken = structuredClone(json) as unknown as { findings: Record<string, unknown>[] };
    broken.findings[0].level = 'severe';
    expect(validate(broken)).toBe(false);
    const extra = structuredClone(json) as unknown as Record<string, unknown>;
    extra.unexpected = 1;
    expect(validate(extra)).toBe(false);
  });

  test('SARIF passes sarif-multitool validate with no errors or warnings', () => {
    const results = multitoolValidate(sarifFile);
    expect(results.filter((r) => r.level === 'error' || r.level === 'warning')).toEqual([]);
  });

  test('the multitool does report a broken SARIF file (the check can fail)', () => {
    const doc = JSON.parse(fs.readFileSync(sarifFile, 'utf8'));
    delete doc.runs[0].tool;
    const bad = path.join(out, 'broken.sarif');
    fs.writeFileSync(bad, JSON.stringify(doc));
    expect(multitoolValidate(bad).filter((r) => r.level === 'error').length).toBeGreaterThan(0);
  });

  test('SARIF is valid against the SARIF 2.1.0 schema the multitool ships', () => {
    const ajv = new Ajv2020({ allErrors: true, strict: false });
    uriFormat(ajv);
    const validate = ajv.compile(JSON.parse(fs.readFileSync(path.join(MULTITOOL_DIR, 'sarif-2.1.0.json'), 'utf8')));
    const doc = JSON.parse(fs.readFileSync(sarifFile, 'utf8'));
    validate(doc);
    expect(validate.errors ?? []).toEqual([]);
  });

  test('SARIF driver, rules and results carry what code-scanning services read', () => {
    const doc = JSON.parse(fs.readFileSync(sarifFile, 'utf8'));
    expect(doc.version).toBe('2.1.0');
    const run = doc.runs[0];
    expect(run.tool.driver).toMatchObject({ name: 'regwise', version: expect.stringMatching(/^\d+\.\d+\.\d+/), informationUri: expect.stringMatching(/^https:\/\//) });
    for (const r of run.tool.driver.rules) {
      expect(r.shortDescription.text.length).toBeGreaterThan(0);
      expect(r.fullDescription.text.length).toBeGreaterThan(0);
      expect(r.help.text.length).toBeGreaterThan(0);
    }
    const ids = run.tool.driver.rules.map((r: { id: string }) => r.id);
    for (const res of run.results) {
      expect(['error', 'warning', 'note']).toContain(res.level);
      expect(ids[res.ruleIndex]).toBe(res.ruleId);
      expect(Object.values(res.partialFingerprints)[0]).toMatch(/^[0-9a-f]{32}:\d+$/);
    }
  });

  test('JSON, SARIF and text report the same findings at the same places', () => {
    const doc = JSON.parse(fs.readFileSync(sarifFile, 'utf8'));
    const fromSarif = doc.runs[0].results.map((r: { ruleId: string; locations: { physicalLocation: { artifactLocation: { uri: string }; region?: { startLine: number } }; properties?: { cell: number; line: number } }[] }) => {
      const l = r.locations[0];
      const line = l.physicalLocation.region?.startLine ?? l.properties!.line;
      return `${decodeURIComponent(l.physicalLocation.artifactLocation.uri)}:${l.properties ? `cell ${l.properties.cell}:` : ''}${line} ${r.ruleId}`;
    });
    expect(fromSarif).toEqual(where(json.findings));
    const fromText = text.split('\n').map((l) => /^(\S+?):(?:cell (\d+):)?(\d+):\d+ (?:error|warning|info|hint) (\S+) /.exec(l)).filter((m) => m).map((m) => `${m![1]}:${m![2] ? `cell ${m![2]}:` : ''}${m![3]} ${m![4]}`);
    expect(fromText).toEqual(where(json.findings));
  });
});

describe('text format', () => {
  test('path:line:col level rule message, the code line with carets, a summary by rule and level', () => {
    const dir = tempDir();
    writeTree(dir, { 'net.py': biasModel() });
    const r = regwise(['scan'], dir);
    expect(r.code).toBe(1);
    const lines = r.stdout.split('\n');
    expect(lines[0]).toMatch(/^net\.py:7:21 warning bias-before-norm Conv2d `conv` has a bias/);
    expect(lines[1]).toBe('    7 |         self.conv = nn.Conv2d(3, 8, 3)');
    expect(lines[2]).toBe('      |                     ^^^^^^^^^^^^^^^^^^');
    expect(lines).toContain('1 finding (1 warning) in 1 file');
    expect(lines).toContain('  bias-before-norm     1  1 warning');
    expect(r.stdout).not.toContain('\x1b[');
  });

  test('colour only on a terminal, and not with NO_COLOR', async () => {
    const dir = tempDir();
    writeTree(dir, { 'net.py': biasModel() });
    const cwd = process.cwd();
    const runIn = async (env: NodeJS.ProcessEnv, outTty: boolean) => {
      let out = '';
      process.chdir(dir);
      try {
        await main(['scan', '--jobs', '1'], { out: (s) => (out += s), err: () => {}, outTty, errTty: false, env });
      } finally {
        process.chdir(cwd);
      }
      return out;
    };
    expect(await runIn({}, true)).toContain('\x1b[');
    expect(await runIn({ NO_COLOR: '1' }, true)).not.toContain('\x1b[');
    expect(await runIn({}, false)).not.toContain('\x1b[');
  });
});

describe('notebooks in reports', () => {
  test('JSON gives the cell (1-based, markdown counted) and the line within it; SARIF puts the cell in properties', () => {
    const dir = tempDir();
    writeTree(dir, { 'explore.ipynb': notebook(NOTEBOOK_CELLS) });
    const j = parseReport(regwise(['scan', '--format', 'json'], dir).stdout);
    expect(where(j.findings)).toEqual(['explore.ipynb:cell 3:4 bias-before-norm']);
    expect(j.findings[0].column).toBe(21);
    const s = JSON.parse(regwise(['scan', '--format', 'sarif'], dir).stdout);
    const loc = s.runs[0].results[0].locations[0];
    expect(loc.physicalLocation.artifactLocation.uri).toBe('explore.ipynb');
    expect(loc.physicalLocation.region).toBeUndefined();
    expect(loc.properties).toMatchObject({ cell: 3, line: 4, column: 21 });
    expect(s.runs[0].results[0].properties).toEqual({ cell: 3 });
  });
});

describe('skipped files and logs', () => {
  test('binary, oversized and broken notebook files are listed with reasons on stderr and in the report', () => {
    const dir = tempDir();
    writeTree(dir, {
      'net.py': biasModel(),
      'blob.py': Buffer.from([0x69, 0x00, 0x01]),
      'big.py': 'x = 1\n'.repeat(900_000),
      'broken.ipynb': '{"cells": [',
    });
    const r = regwise(['scan', '--format', 'json'], dir);
    const j = parseReport(r.stdout);
    expect(j.skipped.map((s) => `${s.path}: ${s.reason.split(' (')[0]}`).sort()).toEqual(['big.py: larger than 5 MB', 'blob.py: binary content', 'broken.ipynb: not a notebook']);
    for (const s of j.skipped) expect(r.stderr).toContain(`regwise: skipped ${s.path}: ${s.reason}`);
    expect(where(j.findings)).toEqual(['net.py:7 bias-before-norm']);
    expect(j.summary.skipped).toBe(3);
  });

  test('an unreadable file is skipped with its reason and the others are read', () => {
    const dir = tempDir();
    writeTree(dir, { 'net.py': biasModel(), 'secret.py': 'x = 1\n' });
    if (process.getuid?.() !== 0) {
      fs.chmodSync(path.join(dir, 'secret.py'), 0);
      const j = parseReport(regwise(['scan', '--format', 'json'], dir).stdout);
      expect(j.skipped).toEqual([{ path: 'secret.py', reason: 'unreadable (EACCES)' }]);
      expect(where(j.findings)).toEqual(['net.py:7 bias-before-norm']);
    }
    // root reads any mode, so also take the case every user can hit: a file gone between the walk and the read
    const files = walk([dir]);
    fs.rmSync(path.join(dir, 'secret.py'));
    const c = collect(dir, files);
    expect(c.skipped).toEqual([{ path: 'secret.py', reason: 'unreadable (ENOENT)' }]);
    expect(c.sources.map((s) => s.rel)).toEqual(['net.py']);
  });

  test('the progress bar shows only on a terminal, never under CI, and not before a second has passed', () => {
    const sink = (isTTY: boolean) => {
      const s = { isTTY, columns: 80, text: '', write: (x: string) => (s.text += x) };
      return s;
    };
    const tty = sink(true);
    new Progress(tty, {}, 0).update('parsing', 1, 2);
    expect(tty.text).toContain('parsing');
    const ci = sink(true);
    new Progress(ci, { CI: 'true' }, 0).update('parsing', 1, 2);
    expect(ci.text).toBe('');
    const pipe = sink(false);
    new Progress(pipe, {}, 0).update('parsing', 1, 2);
    expect(pipe.text).toBe('');
    const early = sink(true);
    new Progress(early, {}, 60_000).update('parsing', 1, 2);
    expect(early.text).toBe('');
  });

  test('reports go to stdout or --output, logs to stderr', () => {
    const dir = tempDir();
    writeTree(dir, { 'net.py': biasModel(), 'blob.py': Buffer.from([0]) });
    const r = regwise(['scan', '--format', 'json', '--output', 'out.json'], dir);
    expect(r.stdout).toBe('');
    expect(r.stderr).toContain('skipped blob.py');
    const j = JSON.parse(fs.readFileSync(path.join(dir, 'out.json'), 'utf8')) as { findings: JsonFinding[]; version: number; tool: { name: string } };
    expect(j.version).toBe(1);
    expect(j.tool.name).toBe('regwise');
    expect(where(j.findings)).toEqual(['net.py:7 bias-before-norm']);
  });
});
