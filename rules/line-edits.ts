// Edits that add a whole statement line (mode switches, conversions) with the indentation of a neighbouring statement.
import type { Stmt } from '../server/src/engine/ir';
import type { TextEdit } from '../server/src/engine/types';

/** Inserts `code` on its own line just before `stmt`, indented like it; undefined when `stmt` does not start its line. */
export function insertLineBefore(text: string, path: string, stmt: Stmt, code: string): TextEdit | undefined {
  const lineStart = text.lastIndexOf('\n', stmt.span.start - 1) + 1;
  const indent = text.slice(lineStart, stmt.span.start);
  if (indent.trim() !== '') return undefined;
  return { path, start: lineStart, end: lineStart, newText: `${indent}${code}\n` };
}
