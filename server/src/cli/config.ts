// The scanner's configuration: finds `regwise.toml` or `[tool.regwise]` in `pyproject.toml`, parses and validates it.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { parse as parseToml, TomlError } from 'smol-toml';
import type { EngineOptions, LevelSetting, Thresholds } from '../engine/types';

export class ConfigError extends Error {
  constructor(readonly file: string, readonly line: number | undefined, message: string) {
    super(`${file}${line !== undefined ? `:${line}` : ''}: ${message}`);
  }
}

export interface ScanConfig {
  /** The file it came from, or undefined when none was found (defaults). */
  file?: string;
  /** Folder that `include`/`exclude` patterns are relative to. */
  dir: string;
  include: string[];
  exclude: string[];
  levels: Record<string, LevelSetting>;
  thresholds: Partial<Thresholds>;
}

export const LEVEL_SETTINGS: readonly LevelSetting[] = ['off', 'hint', 'info', 'warning', 'error'];

/** The schema: top-level keys, and for `[thresholds]` each key's engine name and check. */
const TOP_KEYS = ['include', 'exclude', 'levels', 'thresholds'] as const;
interface ThresholdSpec {
  key: keyof Thresholds;
  what: string;
  ok: (v: number) => boolean;
}
const THRESHOLDS: Record<string, ThresholdSpec> = {
  'min-batch-per-device': { key: 'minBatchPerDevice', what: 'a positive integer', ok: (v) => Number.isInteger(v) && v >= 1 },
  'devices-per-process': { key: 'devicesPerProcess', what: 'a positive integer', ok: (v) => Number.isInteger(v) && v >= 1 },
  'suspicious-drop-rate': { key: 'suspiciousDropRate', what: 'a number between 0 and 1', ok: (v) => v > 0 && v < 1 },
};

export function defaultConfig(dir: string): ScanConfig {
  return { dir, include: [], exclude: [], levels: {}, thresholds: {} };
}

/**
 * Looks for a config from `start` upwards: `regwise.toml` wins over `pyproject.toml` in the same folder; a
 * `pyproject.toml` without `[tool.regwise]` does not count. Stops at the repository root (a folder with `.git`).
 */
export function discoverConfig(start: string): string | undefined {
  let dir = path.resolve(start);
  try {
    if (fs.statSync(dir).isFile()) dir = path.dirname(dir);
  } catch {
    return undefined;
  }
  for (;;) {
    const own = path.join(dir, 'regwise.toml');
    if (fs.existsSync(own)) return own;
    const py = path.join(dir, 'pyproject.toml');
    if (fs.existsSync(py)) {
      try {
        const doc = parseToml(fs.readFileSync(py, 'utf8')) as Record<string, unknown>;
        const tool = doc.tool as Record<string, unknown> | undefined;
        if (tool && typeof tool === 'object' && 'regwise' in tool) return py;
      } catch {
        // a broken pyproject.toml that is not ours to validate unless it holds our table; look further up
        if (/^\s*\[\s*tool\s*\.\s*regwise\b/m.test(fs.readFileSync(py, 'utf8'))) return py;
      }
    }
    if (fs.existsSync(path.join(dir, '.git'))) return undefined;
    const up = path.dirname(dir);
    if (up === dir) return undefined;
    dir = up;
  }
}

/** Reads and validates a config file; `ruleIds` are the valid keys of `[levels]`. */
export function loadConfig(file: string, ruleIds: readonly string[], shownAs = file): ScanConfig {
  let text: string;
  try {
    text = fs.readFileSync(file, 'utf8');
  } catch (err) {
    throw new ConfigError(shownAs, undefined, `cannot read: ${(err as NodeJS.ErrnoException).code ?? String(err)}`);
  }
  let doc: Record<string, unknown>;
  try {
    doc = parseToml(text) as Record<string, unknown>;
  } catch (err) {
    if (err instanceof TomlError) throw new ConfigError(shownAs, err.line, `invalid TOML: ${err.message.split('\n')[0].replace(/^Invalid TOML document: /, '')}`);
    throw err;
  }
  const isPyproject = path.basename(file) === 'pyproject.toml';
  const prefix = isPyproject ? ['tool', 'regwise'] : [];
  let table: unknown = doc;
  for (const p of prefix) table = (table as Record<string, unknown> | undefined)?.[p];
  const cfg = defaultConfig(path.dirname(path.resolve(file)));
  cfg.file = shownAs;
  if (table === undefined) return cfg;
  const locate = keyLocator(text);
  const fail = (keyPath: string[], message: string): never => {
    throw new ConfigError(shownAs, locate([...prefix, ...keyPath]), message);
  };
  if (!isTable(table)) fail([], `${prefix.join('.') || 'the file'} must be a table`);
  const root = table as Record<string, unknown>;
  const where = (k: string[]) => [...prefix, ...k].join('.');
  for (const [k, v] of Object.entries(root)) {
    if (!(TOP_KEYS as readonly string[]).includes(k)) fail([k], unknownMessage(`key '${where([k])}'`, k, TOP_KEYS));
    if (k === 'include' || k === 'exclude') {
      if (!Array.isArray(v) || !v.every((x) => typeof x === 'string')) fail([k], `'${where([k])}' must be a list of path patterns (strings)`);
      cfg[k] = v as string[];
    } else if (k === 'levels') {
      if (!isTable(v)) fail([k], `'${where([k])}' must be a table of RULE = level`);
      for (const [rule, level] of Object.entries(v as Record<string, unknown>)) {
        if (!ruleIds.includes(rule)) fail([k, rule], unknownMessage(`rule id '${rule}'`, rule, ruleIds));
        if (typeof level !== 'string' || !(LEVEL_SETTINGS as readonly string[]).includes(level)) {
          fail([k, rule], `level of '${rule}' must be one of ${LEVEL_SETTINGS.join(', ')} (got ${JSON.stringify(level)})${typeof level === 'string' ? suggestion(level, LEVEL_SETTINGS) : ''}`);
        }
        cfg.levels[rule] = level as LevelSetting;
      }
    } else if (k === 'thresholds') {
      if (!isTable(v)) fail([k], `'${where([k])}' must be a table`);
      for (const [name, value] of Object.entries(v as Record<string, unknown>)) {
        const spec = THRESHOLDS[name];
        if (!spec) fail([k, name], unknownMessage(`threshold '${name}'`, name, Object.keys(THRESHOLDS)));
        if (typeof value !== 'number' || !spec.ok(value)) fail([k, name], `'${name}' must be ${spec.what} (got ${JSON.stringify(value)})`);
        (cfg.thresholds as Record<string, number>)[spec.key] = value as number;
      }
    }
  }
  return cfg;
}

export function engineOptions(cfg: ScanConfig): EngineOptions {
  return { levels: cfg.levels, thresholds: cfg.thresholds };
}

function isTable(v: unknown): boolean {
  return typeof v === 'object' && v !== null && !Array.isArray(v) && !(v instanceof Date);
}

function unknownMessage(what: string, got: string, valid: readonly string[]): string {
  return `unknown ${what}; valid: ${valid.join(', ')}${suggestion(got, valid)}`;
}

function suggestion(got: string, valid: readonly string[]): string {
  const near = nearest(got, valid);
  return near ? ` (did you mean '${near}'?)` : '';
}

/** The closest valid name by edit distance, when it is close enough to be a plausible typo. */
export function nearest(got: string, valid: readonly string[]): string | undefined {
  let best: string | undefined;
  let bestD = Infinity;
  for (const v of valid) {
    const d = editDistance(got.toLowerCase(), v.toLowerCase());
    if (d < bestD) {
      bestD = d;
      best = v;
    }
  }
  if (best !== undefined && bestD <= Math.max(2, Math.floor(best.length / 3))) return best;
  // an abbreviation (`warn` for `warning`) is as plausible as a typo
  return got.length >= 3 ? valid.find((v) => v.toLowerCase().startsWith(got.toLowerCase())) : undefined;
}

export function editDistance(a: string, b: string): number {
  const prev = Array.from({ length: b.length + 1 }, (_, i) => i);
  for (let i = 1; i <= a.length; i++) {
    let diag = prev[0];
    prev[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const tmp = prev[j];
      prev[j] = Math.min(prev[j] + 1, prev[j - 1] + 1, diag + (a[i - 1] === b[j - 1] ? 0 : 1));
      diag = tmp;
    }
  }
  return prev[b.length];
}

/**
 * The TOML library gives values, not positions; error messages name a line, so find where a key path is written:
 * under a `[table]` header, as a dotted key, or as the table header itself. Returns a 1-based line.
 */
function keyLocator(text: string): (keyPath: string[]) => number | undefined {
  const entries: { path: string[]; line: number }[] = [];
  let table: string[] = [];
  const splitKey = (k: string) => k.split('.').map((p) => p.trim().replace(/^["']|["']$/g, ''));
  text.split(/\r?\n/).forEach((raw, i) => {
    const line = raw.replace(/^\s+/, '');
    const header = /^\[\[?\s*([^\]]+?)\s*\]\]?/.exec(line);
    if (header) {
      table = splitKey(header[1]);
      entries.push({ path: table, line: i + 1 });
      return;
    }
    const kv = /^((?:"[^"]*"|'[^']*'|[A-Za-z0-9_-]+)(?:\s*\.\s*(?:"[^"]*"|'[^']*'|[A-Za-z0-9_-]+))*)\s*=/.exec(line);
    if (kv) entries.push({ path: [...table, ...splitKey(kv[1])], line: i + 1 });
  });
  return (keyPath) => {
    // the exact key, else the longest written prefix of it (an inline table holds the rest)
    for (let n = keyPath.length; n > 0; n--) {
      const want = keyPath.slice(0, n).join('\0');
      const hit = entries.find((e) => e.path.join('\0') === want);
      if (hit) return hit.line;
    }
    return undefined;
  };
}
