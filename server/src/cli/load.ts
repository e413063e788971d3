// Reads a tree of files for the scanner: walks roots (gitignore, include/exclude, no escapes), reads sources and data files.
import * as fs from 'node:fs';
import * as path from 'node:path';
import ignore, { type Ignore } from 'ignore';
import type { Engine } from '../engine/engine';
import { isNotebookPath, notebookSource, type SourceFile } from '../engine/source';

export const SOURCE_EXT = ['.py', '.ipynb'];
export const DATA_EXT = ['.yaml', '.yml', '.json', '.toml'];
export const MAX_FILE_BYTES = 5 * 1024 * 1024;
/** JSON data files above this are result dumps, not configs; not worth holding. */
const MAX_JSON_DATA_BYTES = 1024 * 1024;

export interface Skipped {
  path: string;
  reason: string;
}

export interface LoadedTree {
  /** Workspace root the paths are relative to. */
  root: string;
  /** Source paths (as the engine knows them: root-relative, forward slashes). */
  sources: string[];
  skipped: Skipped[];
}

/** A source file as read from disk, with what a fix needs to write it back the same way. */
export interface SourceRecord {
  abs: string;
  /** Root-relative, forward slashes: the engine's path. */
  rel: string;
  /** File text without a BOM (the notebook JSON for notebooks). */
  raw: string;
  bom: boolean;
  size: number;
  mtimeMs: number;
  mode: number;
}

export interface DataRecord {
  rel: string;
  text: string;
}

export interface Collected {
  sources: SourceRecord[];
  data: DataRecord[];
  skipped: Skipped[];
}

export interface WalkFilter {
  /** Folder `include`/`exclude` patterns are relative to. */
  dir: string;
  include: readonly string[];
  exclude: readonly string[];
}

export function toPosix(p: string): string {
  return p.split(path.sep).join('/');
}

function isInside(dir: string, p: string): boolean {
  const r = path.relative(dir, p);
  return r === '' || (!r.startsWith('..') && !path.isAbsolute(r));
}

/** Folders never worth walking; hidden folders are tool state (.git, .venv, .tox, .mypy_cache ...). */
function defaultSkipDir(abs: string): boolean {
  const b = path.basename(abs);
  return b === 'node_modules' || b === '__pycache__' || b === 'venv' || b === 'site-packages' || b.startsWith('.');
}

/** The .gitignore files that apply: from the repository root (the folder holding `.git`) down to each folder walked. */
class GitIgnores {
  private readonly byDir = new Map<string, Ignore | null>();
  private readonly top: string;

  constructor(start: string, topOverride?: string) {
    let dir = start;
    let top = start;
    for (; !topOverride; ) {
      if (fs.existsSync(path.join(dir, '.git'))) {
        top = dir;
        break;
      }
      const up = path.dirname(dir);
      if (up === dir) break;
      dir = up;
    }
    this.top = topOverride ?? top;
  }

  private rules(dir: string): Ignore | null {
    let ig = this.byDir.get(dir);
    if (ig !== undefined) return ig;
    ig = null;
    try {
      const text = fs.readFileSync(path.join(dir, '.gitignore'), 'utf8');
      ig = ignore().add(text);
    } catch {
      // no .gitignore here
    }
    this.byDir.set(dir, ig);
    return ig;
  }

  /** Deeper .gitignore files override shallower ones, as git does (a `!pattern` below re-includes). */
  ignored(abs: string, isDir: boolean): boolean {
    if (!isInside(this.top, abs) || abs === this.top) return false;
    const chain: string[] = [];
    for (let d = path.dirname(abs); isInside(this.top, d); d = path.dirname(d)) {
      chain.unshift(d);
      if (d === this.top) break;
    }
    let ignored = false;
    for (const d of chain) {
      const ig = this.rules(d);
      if (!ig) continue;
      const rel = toPosix(path.relative(d, abs)) + (isDir ? '/' : '');
      const r = ig.test(rel);
      if (r.ignored) ignored = true;
      else if (r.unignored) ignored = false;
    }
    return ignored;
  }
}

/**
 * Walks `roots` (files or folders) to the files worth reading. Symbolic links are followed only when their target
 * lies inside one of the roots, and every real path is visited once, so links can neither escape nor loop.
 * A file named on the command line is taken even if ignored; files found by walking honour .gitignore and the filter.
 */
export function walk(roots: string[], filter?: WalkFilter): string[] {
  const out: string[] = [];
  const seen = new Set<string>();
  const realRoots = roots.map((r) => {
    try {
      return fs.realpathSync(path.resolve(r));
    } catch {
      return path.resolve(r);
    }
  });
  const repoIgnores = new GitIgnores(realRoots[0] ?? process.cwd());
  const inc = filter && filter.include.length ? ignore().add([...filter.include]) : undefined;
  const exc = filter && filter.exclude.length ? ignore().add([...filter.exclude]) : undefined;
  const relToFilter = (abs: string) => (filter ? toPosix(path.relative(filter.dir, abs)) : '');
  const excluded = (abs: string, isDir: boolean) => {
    if (!exc || !filter || !isInside(filter.dir, abs) || abs === filter.dir) return false;
    return exc.ignores(relToFilter(abs) + (isDir ? '/' : ''));
  };
  const included = (abs: string) => {
    if (!inc || !filter) return true;
    if (!isInside(filter.dir, abs)) return false;
    return inc.ignores(relToFilter(abs));
  };
  for (let ri = 0; ri < roots.length; ri++) {
    const top = path.resolve(roots[ri]);
    // a folder named on the command line is scanned even if git ignores it; then only the .gitignore files inside it apply
    const gi = repoIgnores.ignored(realRoots[ri], true) ? new GitIgnores(realRoots[ri], realRoots[ri]) : repoIgnores;
    const stack: { p: string; explicit: boolean; link?: boolean }[] = [{ p: top, explicit: true }];
    // links wait until the real files are seen, so a file reached both ways is reported under its own path
    const deferred: { p: string; explicit: boolean; link?: boolean }[] = [];
    while (stack.length || deferred.length) {
      if (!stack.length) stack.push(...deferred.splice(0).reverse());
      const { p: cur, explicit, link } = stack.pop()!;
      let real: string;
      let st: fs.Stats;
      try {
        if (!explicit && !link && fs.lstatSync(cur).isSymbolicLink()) {
          deferred.push({ p: cur, explicit, link: true });
          continue;
        }
        real = fs.realpathSync(cur);
        st = fs.statSync(real);
      } catch {
        continue;
      }
      if (!realRoots.some((r) => isInside(r, real))) continue;
      if (seen.has(real)) continue;
      seen.add(real);
      if (st.isDirectory()) {
        if (!explicit && (defaultSkipDir(cur) || gi.ignored(real, true) || excluded(real, true))) continue;
        let names: string[];
        try {
          names = fs.readdirSync(cur).sort();
        } catch {
          continue;
        }
        for (let i = names.length - 1; i >= 0; i--) stack.push({ p: path.join(cur, names[i]), explicit: false });
      } else if (st.isFile()) {
        if (!explicit) {
          if (gi.ignored(real, false) || excluded(real, false)) continue;
          if (SOURCE_EXT.includes(path.extname(cur).toLowerCase()) && !included(real)) continue;
        }
        out.push(cur);
      }
    }
  }
  return out;
}

/** Reads what `walk` found: sources (size, BOM, binary checks) and the data files scripts may load. */
export function collect(root: string, files: readonly string[]): Collected {
  const sources: SourceRecord[] = [];
  const data: DataRecord[] = [];
  const skipped: Skipped[] = [];
  for (const abs of files) {
    const ext = path.extname(abs).toLowerCase();
    const isSource = SOURCE_EXT.includes(ext);
    const isData = DATA_EXT.includes(ext);
    if (!isSource && !isData) continue;
    const rel = toPosix(path.relative(root, abs)) || path.basename(abs);
    let buf: Buffer;
    let st: fs.Stats;
    try {
      st = fs.statSync(abs);
      if (st.size > MAX_FILE_BYTES) {
        if (isSource) skipped.push({ path: rel, reason: `larger than ${MAX_FILE_BYTES / 1024 / 1024} MB (${(st.size / 1024 / 1024).toFixed(1)} MB)` });
        continue;
      }
      buf = fs.readFileSync(abs);
    } catch (err) {
      if (isSource) skipped.push({ path: rel, reason: `unreadable (${(err as NodeJS.ErrnoException).code ?? String(err)})` });
      continue;
    }
    if (isData) {
      if (ext !== '.json' || buf.length < MAX_JSON_DATA_BYTES) data.push({ rel, text: buf.toString('utf8') });
      continue;
    }
    if (buf.includes(0)) {
      skipped.push({ path: rel, reason: 'binary content (NUL bytes)' });
      continue;
    }
    let raw = buf.toString('utf8');
    const bom = raw.charCodeAt(0) === 0xfeff;
    if (bom) raw = raw.slice(1);
    if (isNotebookPath(rel) && !notebookSource(rel, raw)) {
      skipped.push({ path: rel, reason: 'not a notebook (invalid JSON or no cells)' });
      continue;
    }
    sources.push({ abs, rel, raw, bom, size: st.size, mtimeMs: st.mtimeMs, mode: st.mode });
  }
  return { sources, data, skipped };
}

/** The program the engine analyses for a record: the text itself, or a notebook's joined code cells. */
export function sourceOf(rec: { rel: string; raw: string }): SourceFile {
  if (isNotebookPath(rec.rel)) return notebookSource(rec.rel, rec.raw) ?? { path: rec.rel, text: '', raw: rec.raw };
  return { path: rec.rel, text: rec.raw, raw: rec.raw };
}

/** Loads every source and data file under `roots` into the engine, relative to `root` (single-threaded). */
export function loadTree(engine: Engine, root: string, roots: string[], files?: string[], filter?: WalkFilter): LoadedTree {
  const c = collect(root, files ?? walk(roots, filter));
  for (const d of c.data) engine.setDataFile(d.rel, d.text);
  for (const s of c.sources) engine.setFile(s.rel, s.raw);
  return { root, sources: c.sources.map((s) => s.rel), skipped: c.skipped };
}
