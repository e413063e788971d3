// `--jobs N` gives the same report as `--jobs 1`: on the real samples and on a generated corpus with cross-file imports.
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import * as path from 'node:path';
import { ROOT, buildCli, cleanBuild, regwise, tempDir } from './helpers';
// @ts-expect-error the generator is plain JavaScript shared with the benchmark
import { generateCorpus } from '../../bench/gen.mjs';

beforeAll(async () => {
  await buildCli();
});
afterAll(() => cleanBuild());

function stats(stderr: string): { workers: number; files: number; parallel: string } {
  return JSON.parse(/regwise-stats (.*)/.exec(stderr)![1]);
}

describe('--jobs parity', () => {
  // two ways to use the workers: facts only (the default), or facts plus the rule checks spread over them (opt-in)
  test.each([
    ['json', 'facts'],
    ['sarif', 'rules'],
    ['text', 'facts'],
    ['text', 'rules'],
  ])('samples/: --jobs 2 and 3 print exactly what --jobs 1 prints (%s, workers run %s)', (format, mode) => {
    const one = regwise(['scan', 'samples', '--format', format, '--jobs', '1'], ROOT, { REGWISE_STATS: '1' });
    expect(stats(one.stderr)).toMatchObject({ workers: 0, parallel: 'none' });
    for (const jobs of ['2', '3']) {
      const many = regwise(['scan', 'samples', '--format', format, '--jobs', jobs], ROOT, { REGWISE_STATS: '1', ...(mode === 'rules' ? { REGWISE_PARALLEL: 'rules' } : {}) });
      expect(stats(many.stderr)).toMatchObject({ workers: Number(jobs), parallel: mode });
      expect(many.stdout).toBe(one.stdout);
      expect(many.code).toBe(one.code);
    }
  });

  test('a generated corpus (many files, imports between them, findings in most) gives identical JSON in both modes', () => {
    const dir = tempDir('regwise-jobs-');
    const corpus = path.join(dir, 'corpus');
    const info = generateCorpus(corpus, 3000, 11) as { files: number };
    const one = regwise(['scan', 'corpus', '--format', 'json', '--jobs', '1', '--fail-level', 'never'], dir);
    const report = JSON.parse(one.stdout) as { findings: unknown[] };
    expect(report.findings.length).toBeGreaterThan(10);
    for (const mode of ['facts', 'rules']) {
      const two = regwise(['scan', 'corpus', '--format', 'json', '--jobs', '2', '--fail-level', 'never'], dir, { REGWISE_STATS: '1', ...(mode === 'rules' ? { REGWISE_PARALLEL: 'rules' } : {}) });
      expect(stats(two.stderr)).toMatchObject({ workers: 2, files: info.files, parallel: mode });
      expect(two.stdout).toBe(one.stdout);
    }
  });

  test('--fix after the workers ran the rules loads the workspace on the main thread and fixes as --jobs 1 does', () => {
    const dir = tempDir('regwise-jobs-fix-');
    generateCorpus(path.join(dir, 'a'), 1500, 5);
    generateCorpus(path.join(dir, 'b'), 1500, 5);
    const one = regwise(['scan', 'a', '--fix', '--jobs', '1', '--format', 'json', '--fail-level', 'never'], dir);
    const two = regwise(['scan', 'b', '--fix', '--jobs', '2', '--format', 'json', '--fail-level', 'never'], dir, { REGWISE_PARALLEL: 'rules' });
    expect(one.stderr).toMatch(/regwise: [1-9]\d* fix/);
    expect(two.stderr.replace(/\bb\//g, 'a/')).toBe(one.stderr);
    // the same report but for the folder name (which the fingerprints hash too)
    const norm = (out: string, folder: string) => JSON.parse(out.split(`"${folder}/`).join('"x/'), (k, v) => (k === 'fingerprint' ? undefined : v));
    expect(norm(two.stdout, 'b')).toEqual(norm(one.stdout, 'a'));
    expect(JSON.parse(one.stdout).findings.length).toBeGreaterThan(0);
  });
});
