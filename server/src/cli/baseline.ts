// Baselines: known findings recorded by rule, path and a hash of their code, so they are tolerated until the code changes.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { TOOL_NAME, VERSION } from './version';

export const BASELINE_FORMAT_VERSION = 1;

export interface BaselineEntry {
  rule: string;
  /** Relative to the baseline file's folder, forward slashes, so the file works from any current folder. */
  path: string;
  /** Hash of the flagged code and its neighbouring lines (see fingerprint.ts); no line numbers. */
  hash: string;
}

export class BaselineError extends Error {}

function key(e: BaselineEntry): string {
  return `${e.rule}\0${e.path}\0${e.hash}`;
}

export function baselinePath(baselineFile: string, absFile: string): string {
  return path.relative(path.dirname(path.resolve(baselineFile)), absFile).split(path.sep).join('/');
}

export function writeBaseline(file: string, entries: BaselineEntry[]): void {
  const sorted = [...entries].sort((a, b) => (key(a) < key(b) ? -1 : key(a) > key(b) ? 1 : 0));
  const doc = { version: BASELINE_FORMAT_VERSION, tool: { name: TOOL_NAME, version: VERSION }, findings: sorted };
  fs.writeFileSync(file, `${JSON.stringify(doc, null, 2)}\n`);
}

/** A multiset: each recorded entry tolerates one finding, so a second copy of a known mistake is new. */
export class Baseline {
  private readonly left = new Map<string, number>();

  constructor(entries: BaselineEntry[]) {
    for (const e of entries) this.left.set(key(e), (this.left.get(key(e)) ?? 0) + 1);
  }

  static read(file: string): Baseline {
    let doc: unknown;
    try {
      doc = JSON.parse(fs.readFileSync(file, 'utf8'));
    } catch (err) {
      throw new BaselineError(`${file}: cannot read baseline: ${err instanceof Error ? err.message : String(err)}`);
    }
    const d = doc as { version?: unknown; findings?: unknown };
    if (!d || d.version !== BASELINE_FORMAT_VERSION || !Array.isArray(d.findings)) throw new BaselineError(`${file}: not a regwise baseline (version ${BASELINE_FORMAT_VERSION} with a findings list)`);
    const entries = d.findings.filter((e): e is BaselineEntry => !!e && typeof e.rule === 'string' && typeof e.path === 'string' && typeof e.hash === 'string');
    if (entries.length !== d.findings.length) throw new BaselineError(`${file}: every baseline entry needs rule, path and hash strings`);
    return new Baseline(entries);
  }

  /** True (and uses the entry up) when the finding is known. */
  take(e: BaselineEntry): boolean {
    const n = this.left.get(key(e)) ?? 0;
    if (!n) return false;
    this.left.set(key(e), n - 1);
    return true;
  }
}
