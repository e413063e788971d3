// The workspace model: files and their facts, module names, import resolution and config files, across files.
import * as posix from 'node:path/posix';
import type { FileFacts } from './facts';
import type { SourceFile } from './source';

export interface WorkspaceFile {
  source: SourceFile;
  facts: FileFacts;
}

/** Data files (YAML/JSON/TOML) a script may load; kept as text and parsed by the config loader on demand. */
export interface DataFile {
  path: string;
  text: string;
}

export class Workspace {
  readonly files = new Map<string, WorkspaceFile>();
  readonly dataFiles = new Map<string, DataFile>();
  /** Dotted module name → file path; several names can point to one file (script dir, src/ layout, package root). */
  private moduleIndex: Map<string, string> | undefined;
  /** resolveModule answers by (importing folder, level, module): the interpreters ask again for every import they evaluate. */
  private readonly resolved = new Map<string, string | undefined>();

  addFile(source: SourceFile, facts: FileFacts): void {
    this.files.set(source.path, { source, facts });
    this.moduleIndex = undefined;
    this.resolved.clear();
  }

  removeFile(path: string): void {
    this.files.delete(path);
    this.dataFiles.delete(path);
    this.moduleIndex = undefined;
    this.resolved.clear();
  }

  addDataFile(path: string, text: string): void {
    this.dataFiles.set(path, { path, text });
  }

  get(path: string): WorkspaceFile | undefined {
    return this.files.get(path);
  }

  /** Module names a file can be imported under, from its package structure. */
  private index(): Map<string, string> {
    if (this.moduleIndex) return this.moduleIndex;
    const idx = new Map<string, string>();
    const paths = [...this.files.keys()].filter((p) => p.endsWith('.py')).sort();
    for (const p of paths) {
      const noExt = p.slice(0, -3);
      const parts = noExt.split('/');
      if (parts[parts.length - 1] === '__init__') parts.pop();
      // every suffix of the path is a possible import name (the script's own folder, a src/ root, the repo root)
      for (let i = 0; i < parts.length; i++) {
        const name = parts.slice(i).join('.');
        if (!name) continue;
        // prefer the shortest path for a name when two files compete
        if (!idx.has(name)) idx.set(name, p);
      }
    }
    this.moduleIndex = idx;
    return idx;
  }

  /**
   * Resolves `module` imported from `fromPath` (with `level` leading dots) to a workspace file, or undefined
   * for library modules. Relative imports resolve against the importing file's package; absolute ones try the
   * importing file's folder first (Python puts a script's folder on sys.path), then any root.
   */
  resolveModule(fromPath: string, module: string, level: number): string | undefined {
    // the answer depends on the importing file's folder only (and on the set of files, which clears the memo)
    const dir = posix.dirname(fromPath);
    const key = `${dir}\0${level}\0${module}`;
    if (this.resolved.has(key)) return this.resolved.get(key);
    const found = this.resolveUncached(dir, module, level);
    this.resolved.set(key, found);
    return found;
  }

  private resolveUncached(dir: string, module: string, level: number): string | undefined {
    const files = this.files;
    const tryPath = (dir: string, mod: string): string | undefined => {
      const rel = mod ? mod.split('.').join('/') : '';
      const base = rel ? (dir && dir !== '.' ? `${dir}/${rel}` : rel) : dir;
      const cands = [`${base}.py`, `${base}/__init__.py`].map((c) => posix.normalize(c));
      return cands.find((c) => files.has(c));
    };
    if (level > 0) {
      let d = dir;
      for (let i = 1; i < level; i++) d = posix.dirname(d);
      return tryPath(d, module);
    }
    const local = tryPath(dir, module);
    if (local) return local;
    const hit = this.index().get(module);
    if (hit) return hit;
    return undefined;
  }

  /** A data file referenced from a script: relative to the script's folder first, then to the workspace root. */
  resolveDataFile(fromPath: string, ref: string): DataFile | undefined {
    const cands = [posix.normalize(posix.join(posix.dirname(fromPath), ref)), posix.normalize(ref)];
    // also walk up: scripts are often run from the project folder that holds configs/
    for (let d = posix.dirname(fromPath); d && d !== '.' && d !== '/'; d = posix.dirname(d)) cands.push(posix.normalize(posix.join(d, ref)));
    for (const c of cands) {
      const f = this.dataFiles.get(c);
      if (f) return f;
    }
    return undefined;
  }

  /** Finds data files whose path ends with `suffix` (for Hydra-style config_path + config_name). */
  findDataFile(dir: string, name: string): DataFile | undefined {
    const want = posix.normalize(posix.join(dir, name));
    return this.dataFiles.get(want);
  }
}
