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

function stats(stderr: string): { workers: number; files: number } {
  return JSON.parse(/regwise-stats (.*)/.exec(stderr)![1]);
}

describe('--jobs parity', () => {
  test.each(['json', 'sarif', 'text'])('samples/: --jobs 2 and 3 print exactly what --jobs 1 prints (%s)', (format) => {
    const one = regwise(['scan', 'samples', '--format', format, '--jobs', '1'], ROOT, { REGWISE_STATS: '1' });
    expect(stats(one.stderr).workers).toBe(0);
    for (const jobs of ['2', '3']) {
      const many = regwise(['scan', 'samples', '--format', format, '--jobs', jobs], ROOT, { REGWISE_STATS: '1' });
      expect(stats(many.stderr).workers).toBe(Number(jobs));
      expect(many.stdout).toBe(one.stdout);
      expect(many.code).toBe(one.code);
    }
  });

  test('a generated corpus (many files, imports between them, findings in most) gives identical JSON', () => {
    const dir = tempDir('regwise-jobs-');
    const corpus = path.join(dir, 'corpus');
    const info = generateCorpus(corpus, 3000, 11) as { files: number };
    const one = regwise(['scan', 'corpus', '--format', 'json', '--jobs', '1', '--fail-level', 'never'], dir);
    const two = regwise(['scan', 'corpus', '--format', 'json', '--jobs', '2', '--fail-level', 'never'], dir, { REGWISE_STATS: '1' });
    expect(stats(two.stderr)).toMatchObject({ workers: 2, files: info.files });
    const report = JSON.parse(one.stdout) as { findings: unknown[] };
    expect(report.findings.length).toBeGreaterThan(10);
    expect(two.stdout).toBe(one.stdout);
  });
});
