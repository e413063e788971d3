// Finds the reference interpreter (/usr/bin/python3 with the Debian packages) and runs the oracle scripts. Under
// CI=true a missing package fails the run; elsewhere the oracle suites are skipped with a message naming the package.
import { spawnSync } from 'node:child_process';
import * as path from 'node:path';
import { describe, test } from 'vitest';

export const PYTHON = '/usr/bin/python3';
export const ORACLE_DIR = path.resolve(__dirname, 'py');

/** A Python module an oracle needs and the Debian package that ships it. */
export interface PyNeed {
  module: string;
  debian: string;
}

export const TORCH: PyNeed = { module: 'torch', debian: 'python3-torch' };

/** The needs that are not met by /usr/bin/python3, each checked by importing it. */
export function missingPython(needs: readonly PyNeed[]): PyNeed[] {
  return needs.filter((n) => {
    const r = spawnSync(PYTHON, ['-c', `import ${n.module}`], { encoding: 'utf8', timeout: 60_000 });
    return r.error !== undefined || r.status !== 0;
  });
}

/**
 * Declares an oracle suite. With every need met, `body` runs inside `describe(name)`. Otherwise, under CI=true, one
 * failing test names the missing Debian packages; elsewhere the suite is skipped and a warning says why.
 */
export function oracleSuite(name: string, needs: readonly PyNeed[], body: () => void): void {
  const missing = missingPython(needs);
  if (!missing.length) {
    describe(name, body);
    return;
  }
  const what = missing.map((m) => `${m.module} (Debian package ${m.debian})`).join(', ');
  const msg = `${PYTHON} cannot import ${what}; install it with: apt-get install ${missing.map((m) => m.debian).join(' ')}`;
  if (process.env.CI === 'true') {
    describe(name, () => {
      test('reference interpreter has the packages the oracle needs', () => {
        throw new Error(msg);
      });
    });
    return;
  }
  console.warn(`\n*** SKIPPING oracle suite "${name}": ${msg} ***\n`);
  describe.skip(`${name} [skipped: ${msg}]`, body);
}

/** Runs an oracle script with /usr/bin/python3 and parses the one JSON object it prints. */
export function runOracle(script: string, args: readonly string[] = [], cwd = path.resolve(ORACLE_DIR, '..', '..', '..')): any {
  const r = spawnSync(PYTHON, [path.join(ORACLE_DIR, script), ...args], { encoding: 'utf8', cwd, timeout: 300_000, maxBuffer: 64 * 1024 * 1024 });
  if (r.error) throw r.error;
  if (r.status !== 0) throw new Error(`${script} exited with ${r.status}:\n${r.stderr}`);
  try {
    return JSON.parse(r.stdout);
  } catch (err) {
    throw new Error(`${script} printed no JSON: ${String(err)}\n${r.stdout.slice(0, 2000)}\n${r.stderr.slice(0, 2000)}`);
  }
}
