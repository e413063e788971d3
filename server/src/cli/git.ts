// `--changed-since GITREF`: the files git says differ from a ref (committed, staged, unstaged) plus untracked ones.
import { execFileSync } from 'node:child_process';
import * as path from 'node:path';

export class GitError extends Error {}

function git(cwd: string, args: string[]): string {
  try {
    return execFileSync('git', args, { cwd, encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'], maxBuffer: 64 * 1024 * 1024 });
  } catch (err) {
    const e = err as { stderr?: string; message: string };
    throw new GitError(`git ${args.join(' ')} failed: ${(e.stderr ?? e.message).trim().split('\n')[0]}`);
  }
}

/** Absolute paths of files changed since `ref` in the repository that holds `cwd`. */
export function changedSince(cwd: string, ref: string): Set<string> {
  if (ref.startsWith('-')) throw new GitError(`not a git ref: ${ref}`);
  const top = git(cwd, ['rev-parse', '--show-toplevel']).trim();
  git(cwd, ['rev-parse', '--verify', '--quiet', `${ref}^{commit}`]);
  const lines = [
    ...git(top, ['diff', '--name-only', '--no-renames', '-z', ref, '--']).split('\0'),
    ...git(top, ['ls-files', '--others', '--exclude-standard', '-z']).split('\0'),
  ];
  return new Set(lines.filter(Boolean).map((l) => path.join(top, l)));
}
