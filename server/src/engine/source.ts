// Source files as the engine sees them: Python text, or a notebook's code cells joined into one program with a cell map.
export interface CellMap {
  /** 0-based index of the cell among all cells of the notebook. */
  index: number;
  /** Offset and line in the joined program where the cell starts. */
  offset: number;
  line: number;
  lineCount: number;
  /** The cell's own text as stored (before magics were masked). */
  text: string;
}

export interface SourceFile {
  /** Path as the caller names it (workspace-relative with forward slashes in the scanner). */
  path: string;
  /** The Python program analysed: the file's text, or a notebook's code cells joined by newlines. */
  text: string;
  /** Present for notebooks. */
  cells?: CellMap[];
  /** The raw file text (the notebook JSON for notebooks). */
  raw: string;
}

export interface NotebookCellRef {
  cell: number;
  line: number;
  col: number;
}

/** IPython magics and shell escapes are not Python: mask them as comments of the same length so offsets hold. */
function maskMagics(text: string): string {
  return text.replace(/^([ \t]*)([%!])/gm, (_, ws: string) => `${ws}#`);
}

export function cellSource(cell: { source?: unknown }): string {
  const s = cell.source;
  if (Array.isArray(s)) return s.join('');
  return typeof s === 'string' ? s : '';
}

/** Builds the joined program of a notebook; returns undefined when the JSON is not a notebook. */
export function notebookSource(path: string, raw: string): SourceFile | undefined {
  let nb: { cells?: { cell_type?: string; source?: unknown }[] };
  try {
    nb = JSON.parse(raw);
  } catch {
    return undefined;
  }
  if (!nb || !Array.isArray(nb.cells)) return undefined;
  return joinCells(path, raw, nb.cells.map((c) => ({ kind: c.cell_type === 'code' ? 'code' : 'other', text: cellSource(c) })));
}

/** Joins code cells in order into one program; also used by the language server for notebook documents. */
export function joinCells(path: string, raw: string, cells: { kind: 'code' | 'other'; text: string }[]): SourceFile {
  const maps: CellMap[] = [];
  let text = '';
  let line = 0;
  cells.forEach((c, index) => {
    if (c.kind !== 'code') return;
    const body = c.text.endsWith('\n') ? c.text : `${c.text}\n`;
    const lineCount = body.split('\n').length - 1;
    maps.push({ index, offset: text.length, line, lineCount, text: c.text });
    text += maskMagics(body);
    line += lineCount;
  });
  return { path, text, cells: maps, raw };
}

export function cellAt(file: SourceFile, line: number): CellMap | undefined {
  if (!file.cells) return undefined;
  let found: CellMap | undefined;
  for (const c of file.cells) {
    if (c.line <= line) found = c;
    else break;
  }
  return found;
}

/** Maps a program position to its notebook cell; undefined for plain files. */
export function toCell(file: SourceFile, line: number, col: number): NotebookCellRef | undefined {
  const c = cellAt(file, line);
  return c ? { cell: c.index, line: line - c.line, col } : undefined;
}

export function isNotebookPath(p: string): boolean {
  return p.toLowerCase().endsWith('.ipynb');
}
