// Open editor documents as the server holds them: text kept in step with incremental changes, the tree reused
// across edits (tree.edit + reparse), and a line index to convert offsets to protocol positions.
import { editTree, type PythonParser, type TextChange, type Tree } from '../engine/parser';
import { joinCells, type CellMap, type SourceFile } from '../engine/source';

export interface Position {
  line: number;
  character: number;
}

export interface Range {
  start: Position;
  end: Position;
}

/** A change as the protocol sends it: with a range (incremental) or without (whole text). */
export interface ContentChange {
  range?: Range;
  text: string;
}

/** Line starts of a text, for offset ↔ position in UTF-16 code units (the protocol's default encoding). */
export class LineIndex {
  private readonly starts: number[];

  constructor(readonly text: string) {
    const starts = [0];
    for (let i = text.indexOf('\n'); i !== -1; i = text.indexOf('\n', i + 1)) starts.push(i + 1);
    this.starts = starts;
  }

  get lineCount(): number {
    return this.starts.length;
  }

  offsetAt(p: Position): number {
    if (p.line < 0) return 0;
    if (p.line >= this.starts.length) return this.text.length;
    const start = this.starts[p.line];
    const next = p.line + 1 < this.starts.length ? this.starts[p.line + 1] - 1 : this.text.length;
    return Math.min(start + Math.max(0, p.character), Math.max(start, next));
  }

  positionAt(offset: number): Position {
    const o = Math.max(0, Math.min(offset, this.text.length));
    let lo = 0;
    let hi = this.starts.length - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (this.starts[mid] <= o) lo = mid;
      else hi = mid - 1;
    }
    return { line: lo, character: o - this.starts[lo] };
  }

  lineText(line: number): string {
    if (line < 0 || line >= this.starts.length) return '';
    const end = line + 1 < this.starts.length ? this.starts[line + 1] - 1 : this.text.length;
    return this.text.slice(this.starts[line], end);
  }
}

/** A Python text document open in the editor, with its incrementally maintained tree. */
export class PythonDocument {
  private index: LineIndex;
  tree: Tree | undefined;
  /** How many updates reparsed reusing the old tree (the rest parsed from scratch); for tests and diagnostics. */
  incrementalParses = 0;

  constructor(readonly uri: string, readonly path: string, public version: number, private content: string, private readonly parser: PythonParser) {
    this.index = new LineIndex(content);
    this.tree = parser.parse(content);
  }

  get text(): string {
    return this.content;
  }

  get lines(): LineIndex {
    return this.index;
  }

  /** Applies the protocol's changes in order; ranged changes edit the tree so the reparse reuses it. */
  update(changes: readonly ContentChange[], version: number): void {
    let text = this.content;
    let index = this.index;
    const edits: TextChange[] = [];
    let full = false;
    for (const c of changes) {
      if (!c.range) {
        text = c.text;
        full = true;
        edits.length = 0;
      } else {
        const start = index.offsetAt(c.range.start);
        const end = Math.max(start, index.offsetAt(c.range.end));
        edits.push({ start, end, newText: c.text });
        text = text.slice(0, start) + c.text + text.slice(end);
      }
      index = new LineIndex(text);
    }
    const old = this.tree;
    if (!full && old && edits.length) {
      // the tree was parsed from this.content: replay the ranged edits on it, then reparse reusing it
      const edited = editTree(old, this.content, edits);
      if (edited === text) {
        this.tree = this.parser.parse(text, old);
        this.incrementalParses++;
      } else this.tree = this.parser.parse(text);
    } else {
      // a whole-text change: the old tree no longer matches any base text the edits refer to
      this.tree = this.parser.parse(text);
    }
    old?.delete();
    this.content = text;
    this.index = index;
    this.version = version;
  }

  dispose(): void {
    this.tree?.delete();
    this.tree = undefined;
  }
}

export interface Cell {
  uri: string;
  kind: 'code' | 'other';
  language: string;
  version: number;
  text: string;
  lines: LineIndex;
}

/** A notebook open in the editor: its cells in order; the engine analyses the code cells joined as one program. */
export class NotebookDocument {
  cells: Cell[] = [];
  private program: { source: SourceFile; lines: LineIndex } | undefined;

  constructor(readonly uri: string, readonly path: string, public version: number) {}

  /** The joined program of the Python code cells, with the engine's cell map. */
  get source(): SourceFile {
    return this.joined().source;
  }

  get lines(): LineIndex {
    return this.joined().lines;
  }

  private joined(): { source: SourceFile; lines: LineIndex } {
    if (!this.program) {
      const source = joinCells(this.path, '', this.cells.map((c) => ({ kind: c.kind === 'code' && c.language === 'python' ? 'code' : 'other', text: c.text })));
      this.program = { source, lines: new LineIndex(source.text) };
    }
    return this.program;
  }

  changed(): void {
    this.program = undefined;
  }

  cellByUri(uri: string): Cell | undefined {
    return this.cells.find((c) => c.uri === uri);
  }

  /** The cell map entry of a cell, when it is a code cell in the program. */
  mapOf(cellUri: string): CellMap | undefined {
    const i = this.cells.findIndex((c) => c.uri === cellUri);
    return this.source.cells?.find((m) => m.index === i);
  }

  /** The cell holding a program line, and the line within it. */
  cellAtLine(line: number): { cell: Cell; map: CellMap } | undefined {
    let found: CellMap | undefined;
    for (const m of this.source.cells ?? []) {
      if (m.line <= line) found = m;
      else break;
    }
    if (!found || line >= found.line + found.lineCount) return undefined;
    return { cell: this.cells[found.index], map: found };
  }
}

/** Applies protocol content changes to a plain text (notebook cells keep no tree). */
export function applyContentChanges(text: string, changes: readonly ContentChange[]): string {
  let cur = text;
  for (const c of changes) {
    if (!c.range) {
      cur = c.text;
      continue;
    }
    const idx = new LineIndex(cur);
    const start = idx.offsetAt(c.range.start);
    const end = Math.max(start, idx.offsetAt(c.range.end));
    cur = cur.slice(0, start) + c.text + cur.slice(end);
  }
  return cur;
}
