// `--fix` / `--fix-suggested` on disk: runs the engine's one applier per file, maps notebook edits back to cells, writes atomically.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { randomBytes } from 'node:crypto';
import type { Engine } from '../engine/engine';
import { fixUntilStable, chooseFixes, type FixChoice } from '../engine/fix';
import { cellSource, joinCells, type SourceFile } from '../engine/source';
import type { Finding, FixKind, TextEdit } from '../engine/types';
import type { SourceRecord, Skipped } from './load';
import { sourceOf } from './load';
import { replaceCellSources } from './nbjson';

export interface FixLogEntry {
  path: string;
  /** 1-based; within the cell for notebooks. */
  line: number;
  cell?: number;
  rule: string;
  title: string;
}

export interface FixOutcome {
  changed: string[];
  applied: FixLogEntry[];
  /** Files with fixes that were not written, and why. */
  refused: Skipped[];
}

/** The line ending a file mostly uses; new lines a fix inserts get the same. */
export function detectEol(text: string): '\n' | '\r\n' {
  const crlf = (text.match(/\r\n/g) ?? []).length;
  const lf = (text.match(/\n/g) ?? []).length - crlf;
  return crlf > lf ? '\r\n' : '\n';
}

function withEol(edits: TextEdit[], eol: '\n' | '\r\n'): TextEdit[] {
  if (eol === '\n') return edits;
  return edits.map((e) => ({ ...e, newText: e.newText.replace(/\r?\n/g, '\r\n') }));
}

/** Writes next to the target and renames over it, so a reader sees the old file or the new one, never half of one. */
export function writeAtomic(file: string, content: string, mode: number): void {
  const tmp = path.join(path.dirname(file), `.${path.basename(file)}.regwise-${process.pid}-${randomBytes(4).toString('hex')}.tmp`);
  let fd: number | undefined;
  try {
    fd = fs.openSync(tmp, 'wx', mode & 0o7777);
    fs.writeSync(fd, content);
    fs.fsyncSync(fd);
    fs.closeSync(fd);
    fd = undefined;
    fs.chmodSync(tmp, mode & 0o7777);
    fs.renameSync(tmp, file);
  } catch (err) {
    if (fd !== undefined) fs.closeSync(fd);
    fs.rmSync(tmp, { force: true });
    throw err;
  }
}

interface NbCell {
  kind: 'code' | 'other';
  text: string;
}

function notebookCells(raw: string): NbCell[] {
  const nb = JSON.parse(raw) as { cells: { cell_type?: string; source?: unknown }[] };
  return nb.cells.map((c) => ({ kind: c.cell_type === 'code' ? 'code' : 'other', text: cellSource(c) }));
}

/**
 * Replays the applier's passes on a notebook's cells: each pass's edits are against that pass's joined program, so
 * map each to its cell with that pass's cell map. An edit that spans cells or touches the text joinCells added fails.
 */
function replayOnCells(rel: string, raw: string, start: SourceFile, passes: TextEdit[][]): { cells: NbCell[]; source: SourceFile } | string {
  const cells = notebookCells(raw);
  let source = start;
  for (const edits of passes) {
    const perCell = new Map<number, TextEdit[]>();
    for (const e of edits) {
      const c = source.cells!.find((m) => e.start >= m.offset && e.end <= m.offset + m.text.length);
      if (!c) return `a fix at offset ${e.start} does not lie inside one cell`;
      perCell.set(c.index, [...(perCell.get(c.index) ?? []), { ...e, start: e.start - c.offset, end: e.end - c.offset }]);
    }
    for (const [index, list] of perCell) {
      let t = cells[index].text;
      for (const e of [...list].sort((a, b) => b.start - a.start)) t = t.slice(0, e.start) + e.newText + t.slice(e.end);
      cells[index] = { ...cells[index], text: t };
    }
    source = joinCells(rel, raw, cells);
  }
  return { cells, source };
}

function cellLine(source: SourceFile, line0: number): { cell?: number; line: number } {
  if (!source.cells) return { line: line0 + 1 };
  let found = source.cells[0];
  for (const c of source.cells) if (c.line <= line0) found = c;
  return found ? { cell: found.index + 1, line: line0 - found.line + 1 } : { line: line0 + 1 };
}

/**
 * Fixes every file in `records` that has an applicable fix in `findings`. The engine's workspace is left holding the
 * fixed texts (or the originals for files not written), so a re-analysis reports what remains.
 */
export function applyFixesToFiles(engine: Engine, records: readonly SourceRecord[], findings: readonly Finding[], kind: FixKind): FixOutcome {
  const out: FixOutcome = { changed: [], applied: [], refused: [] };
  const wanted = new Set(records.map((r) => r.rel).filter((rel) => chooseFixes(findings.filter((f) => f.path === rel), rel, kind).length));
  for (const rec of records) {
    if (!wanted.has(rec.rel)) continue;
    const original = sourceOf(rec);
    const isNb = !!original.cells;
    const eol = detectEol(rec.raw);
    const rounds: Finding[][] = [];
    let current: SourceFile = original;
    const analyse = (text: string): Finding[] => {
      if (text !== current.text) {
        current = isNb ? { ...current, text } : { path: rec.rel, text, raw: text };
        if (isNb) engine.setSource(current);
        else engine.setFile(rec.rel, text);
      }
      const fs_ = engine.analyze([rec.rel]).map((f) => ({ ...f, fixes: f.fixes.map((x) => ({ ...x, edits: withEol(x.edits, isNb ? '\n' : eol) })) }));
      rounds.push(fs_);
      return fs_;
    };
    const restore = () => engine.setFile(rec.rel, rec.raw);
    let result: { text: string; applied: FixChoice[] };
    try {
      result = fixUntilStable(engine.parser, rec.rel, original.text, kind, analyse);
    } catch (err) {
      restore();
      out.refused.push({ path: rec.rel, reason: `fixing failed: ${err instanceof Error ? err.message : String(err)}` });
      continue;
    }
    if (!result.applied.length || result.text === original.text) {
      restore();
      continue;
    }
    // group the applied fixes by the pass whose findings they came from, to replay them on cells and to log lines
    const passOf = (c: FixChoice) => rounds.findIndex((r) => r.includes(c.finding));
    const passes: TextEdit[][] = rounds.map(() => []);
    for (const c of result.applied) passes[passOf(c)].push(...c.fix.edits);
    let newRaw: string;
    if (isNb) {
      const replay = replayOnCells(rec.rel, rec.raw, original, passes.filter((p) => p.length));
      if (typeof replay === 'string' || replay.source.text !== result.text) {
        restore();
        out.refused.push({ path: rec.rel, reason: `not written: ${typeof replay === 'string' ? replay : 'the fixed cells do not give the fixed program (a fix touches an IPython magic)'}` });
        continue;
      }
      const changes = new Map<number, string>();
      const before = notebookCells(rec.raw);
      replay.cells.forEach((c, i) => {
        if (c.text !== before[i].text) changes.set(i, c.text);
      });
      try {
        newRaw = replaceCellSources(rec.raw, changes);
      } catch (err) {
        restore();
        out.refused.push({ path: rec.rel, reason: `not written: ${err instanceof Error ? err.message : String(err)}` });
        continue;
      }
    } else newRaw = result.text;
    // the file must still be what was read: an editor or another tool may have written it meanwhile
    let now: string;
    try {
      now = fs.readFileSync(rec.abs, 'utf8');
    } catch {
      now = '';
    }
    if (now !== (rec.bom ? '\ufeff' : '') + rec.raw) {
      restore();
      out.refused.push({ path: rec.rel, reason: 'changed on disk since it was read; not written' });
      continue;
    }
    try {
      writeAtomic(rec.abs, (rec.bom ? '\ufeff' : '') + newRaw, rec.mode);
    } catch (err) {
      restore();
      out.refused.push({ path: rec.rel, reason: `write failed (${(err as NodeJS.ErrnoException).code ?? String(err)})` });
      continue;
    }
    engine.setFile(rec.rel, newRaw);
    out.changed.push(rec.rel);
    // log each fix at its line in the text it was applied to (the pass's program)
    for (const c of result.applied) {
      const pass = passOf(c);
      const at = isNb ? cellLine(passSource(rec, original, passes, pass), c.finding.span.line) : { line: c.finding.span.line + 1 };
      out.applied.push({ path: rec.rel, line: at.line, ...(at.cell !== undefined ? { cell: at.cell } : {}), rule: c.finding.rule, title: c.fix.title });
    }
  }
  return out;
}

/** The notebook program a pass ran on: the original with the edits of all earlier passes replayed. */
function passSource(rec: SourceRecord, original: SourceFile, passes: TextEdit[][], pass: number): SourceFile {
  const r = replayOnCells(rec.rel, rec.raw, original, passes.slice(0, pass).filter((p) => p.length));
  return typeof r === 'string' ? original : r.source;
}
