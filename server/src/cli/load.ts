// Reads a tree of files into an Engine: Python sources, notebooks and the data files scripts may load.
import * as fs from 'node:fs';
import * as path from 'node:path';
import type { Engine } from '../engine/engine';

export const SOURCE_EXT = ['.py', '.ipynb'];
export const DATA_EXT = ['.yaml', '.yml', '.json', '.toml'];
export const MAX_FILE_BYTES = 5 * 1024 * 1024;

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

export function toPosix(p: string): string {
  return p.split(path.sep).join('/');
}

/** Walks `roots` (files or folders), never following symlinks out of them or around loops. */
export function walk(roots: string[], skipDir: (abs: string) => boolean = defaultSkipDir): string[] {
  const out: string[] = [];
  const seen = new Set<string>();
  for (const r of roots) {
    const stack = [path.resolve(r)];
    while (stack.length) {
      const cur = stack.pop()!;
      let st: fs.Stats;
      try {
        st = fs.lstatSync(cur);
      } catch {
        continue;
      }
      if (st.isSymbolicLink()) continue;
      let real: string;
      try {
        real = fs.realpathSync(cur);
      } catch {
        continue;
      }
      if (seen.has(real)) continue;
      seen.add(real);
      if (st.isDirectory()) {
        if (cur !== path.resolve(r) && skipDir(cur)) continue;
        let names: string[];
        try {
          names = fs.readdirSync(cur).sort();
        } catch {
          continue;
        }
        for (let i = names.length - 1; i >= 0; i--) stack.push(path.join(cur, names[i]));
      } else if (st.isFile()) out.push(cur);
    }
  }
  return out;
}

function defaultSkipDir(abs: string): boolean {
  const b = path.basename(abs);
  return b === 'node_modules' || b === '.git' || b === '__pycache__' || b === '.venv' || b === 'venv' || b.startsWith('.');
}

/** Loads every source and data file under `roots` into the engine, relative to `root`. */
export function loadTree(engine: Engine, root: string, roots: string[], files?: string[]): LoadedTree {
  const sources: string[] = [];
  const skipped: Skipped[] = [];
  const all = files ?? walk(roots);
  for (const abs of all) {
    const ext = path.extname(abs).toLowerCase();
    const isSource = SOURCE_EXT.includes(ext);
    const isData = DATA_EXT.includes(ext);
    if (!isSource && !isData) continue;
    const rel = toPosix(path.relative(root, abs)) || path.basename(abs);
    let buf: Buffer;
    try {
      const st = fs.statSync(abs);
      if (st.size > MAX_FILE_BYTES) {
        if (isSource) skipped.push({ path: rel, reason: `larger than ${MAX_FILE_BYTES / 1024 / 1024} MB (${(st.size / 1024 / 1024).toFixed(1)} MB)` });
        continue;
      }
      buf = fs.readFileSync(abs);
    } catch (err) {
      if (isSource) skipped.push({ path: rel, reason: `unreadable: ${(err as NodeJS.ErrnoException).code ?? String(err)}` });
      continue;
    }
    if (isData) {
      if (ext !== '.json' || buf.length < 1024 * 1024) engine.setDataFile(rel, buf.toString('utf8'));
      continue;
    }
    if (buf.includes(0)) {
      skipped.push({ path: rel, reason: 'binary content (NUL bytes)' });
      continue;
    }
    let text = buf.toString('utf8');
    if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
    engine.setFile(rel, text);
    sources.push(rel);
  }
  return { root, sources, skipped };
}
