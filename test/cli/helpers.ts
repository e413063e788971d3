// Test helpers for the scanner: a private build of the CLI (so worker threads run as shipped), runs, temp trees, a git repo.
import * as esbuild from 'esbuild';
import { execFileSync, spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';

export const ROOT = path.resolve(__dirname, '..', '..');

let built: string | undefined;

/** Bundles cli.js and worker.js into test-artifacts/ (one folder per test process, so parallel runs do not collide). */
export async function buildCli(): Promise<string> {
  if (built) return built;
  const out = path.join(ROOT, 'test-artifacts', `cli-${process.pid}`);
  fs.mkdirSync(path.join(out, 'rules'), { recursive: true });
  const common = { alias: { 'web-tree-sitter': './node_modules/web-tree-sitter/web-tree-sitter.cjs' }, bundle: true, platform: 'node' as const, target: 'node18', format: 'cjs' as const, logLevel: 'warning' as const, absWorkingDir: ROOT };
  await esbuild.build({ ...common, entryPoints: ['server/src/cli/main.ts'], outfile: path.join(out, 'cli.js') });
  await esbuild.build({ ...common, entryPoints: ['server/src/cli/worker.ts'], outfile: path.join(out, 'worker.js') });
  for (const [pkg, file] of [['web-tree-sitter', 'web-tree-sitter.wasm'], ['tree-sitter-python', 'tree-sitter-python.wasm']]) {
    fs.copyFileSync(path.join(ROOT, 'node_modules', pkg, file), path.join(out, file));
  }
  for (const f of fs.readdirSync(path.join(ROOT, 'rules'))) if (f.endsWith('.md')) fs.copyFileSync(path.join(ROOT, 'rules', f), path.join(out, 'rules', f));
  built = out;
  return out;
}

export function cleanBuild(): void {
  if (built) fs.rmSync(built, { recursive: true, force: true });
  built = undefined;
}

export interface Run {
  code: number;
  stdout: string;
  stderr: string;
}

/** Runs the built CLI in `cwd` with CI set (no progress bar, no colour: stdout is a pipe). */
export function regwise(args: string[], cwd: string, env: Record<string, string> = {}): Run {
  if (!built) throw new Error('call buildCli() in beforeAll');
  const r = spawnSync(process.execPath, [path.join(built, 'cli.js'), ...args], { cwd, encoding: 'utf8', env: { ...process.env, CI: 'true', NO_COLOR: '', ...env }, maxBuffer: 64 * 1024 * 1024 });
  return { code: r.status ?? -1, stdout: r.stdout, stderr: r.stderr };
}

export function tempDir(prefix = 'regwise-cli-'): string {
  return fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), prefix)));
}

/** Writes `files` (path → text) under `dir`. */
export function writeTree(dir: string, files: Record<string, string | Buffer>): void {
  for (const [rel, text] of Object.entries(files)) {
    const p = path.join(dir, rel);
    fs.mkdirSync(path.dirname(p), { recursive: true });
    fs.writeFileSync(p, text);
  }
}

export function git(cwd: string, ...args: string[]): string {
  return execFileSync('git', args, { cwd, encoding: 'utf8', env: { ...process.env, GIT_AUTHOR_NAME: 't', GIT_AUTHOR_EMAIL: 't@example.invalid', GIT_COMMITTER_NAME: 't', GIT_COMMITTER_EMAIL: 't@example.invalid', GIT_CONFIG_NOSYSTEM: '1', HOME: cwd } });
}

/** A model whose conv bias the next BatchNorm cancels (bias-before-norm fires on the Conv2d line). */
export function biasModel(name = 'Net', channels = 8): string {
  return `import torch.nn as nn


class ${name}(nn.Module):
    def __init__(self):
        super().__init__()
        self.conv = nn.Conv2d(3, ${channels}, 3)
        self.bn = nn.BatchNorm2d(${channels})

    def forward(self, x):
        return self.bn(self.conv(x))
`;
}

export interface JsonFinding {
  rule: string;
  level: string;
  path: string;
  line: number;
  column: number;
  cell?: number;
  message: string;
  fingerprint: string;
  fixes: { title: string; kind: string; edits: { path: string; start: number; end: number; newText: string }[] }[];
}

export function parseReport(stdout: string): { findings: JsonFinding[]; skipped: { path: string; reason: string }[]; summary: Record<string, unknown> } {
  return JSON.parse(stdout);
}

/** `path:line rule` of each finding, for comparing positions rather than counts. */
export function where(findings: JsonFinding[]): string[] {
  return findings.map((f) => `${f.path}:${f.cell !== undefined ? `cell ${f.cell}:` : ''}${f.line} ${f.rule}`);
}
