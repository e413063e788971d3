// A second real client: headless Neovim (Debian's `neovim`) attaches to the built server over stdio, receives the
// diagnostics for a sample and applies the preferred quick-fix; the saved file on disk is checked.
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { SERVER, copySample, rangeOf, requireBuiltServer } from './harness';

const NVIM = '/usr/bin/nvim';
const have = fs.existsSync(NVIM);
if (!have) {
  if (process.env.CI === 'true') throw new Error(`${NVIM} is missing: .ci/run must apt-get install neovim`);
  console.warn(`SKIPPING the Neovim client test: ${NVIM} not found (Debian package: neovim)`);
}

describe.skipIf(!have)('Neovim as a client', () => {
  it('shows the bias-before-norm diagnostic and applies its quick-fix', () => {
    requireBuiltServer();
    const root = copySample('pollinator_cnn');
    const file = path.join(root, 'models.py');
    const before = fs.readFileSync(file, 'utf8');
    const out = path.join(root, 'nvim-result.json');
    const r = spawnSync(NVIM, ['--headless', '--clean', '-n', '-i', 'NONE', '-c', `luafile ${path.join(__dirname, 'fixtures', 'neovim-check.lua')}`], {
      env: { ...process.env, REGWISE_SERVER: SERVER, REGWISE_FILE: file, REGWISE_ROOT: root, REGWISE_OUT: out, REGWISE_RULE: 'bias-before-norm', XDG_STATE_HOME: root, XDG_DATA_HOME: root },
      timeout: 60_000,
      encoding: 'utf8',
    });
    expect(fs.existsSync(out), `nvim wrote no result; status ${r.status}, stderr:\n${r.stderr}`).toBe(true);
    const res = JSON.parse(fs.readFileSync(out, 'utf8'));
    expect(res.error).toBeUndefined();
    const stem = rangeOf(before, 'nn.Conv2d(in_ch, out_ch, kernel_size=5, stride=2, padding=2)');
    const ours = res.diagnostics.filter((d: { code: string }) => d.code === 'bias-before-norm');
    expect(ours).toEqual([
      expect.objectContaining({ source: 'regwise', severity: 2, lnum: stem.start.line, col: stem.start.character, end_lnum: stem.end.line, end_col: stem.end.character }),
    ]);
    expect(res.applied).toBe('Pass bias=False to `conv`');
    expect(res.cleared).toBe(true);
    const after = fs.readFileSync(file, 'utf8');
    expect(after).toBe(before.replace('padding=2)\n        self.bn', 'padding=2, bias=False)\n        self.bn'));
  });
});
