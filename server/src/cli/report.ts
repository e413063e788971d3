// The scanner's report model: engine findings turned into display positions (cells for notebooks) and the JSON report.
import * as path from 'node:path';
import { toCell, type SourceFile } from '../engine/source';
import type { Finding, Level } from '../engine/types';
import type { Span } from '../engine/ir';
import { LEVELS } from '../engine/types';
import type { Skipped } from './load';
import { INFORMATION_URI, TOOL_NAME, VERSION } from './version';

/** Version of the JSON report format (docs/report.schema.json); bump on any incompatible change. */
export const REPORT_FORMAT_VERSION = 1;

export interface Position {
  path: string;
  /** 1-based; within the cell for notebooks. */
  line: number;
  column: number;
  endLine: number;
  endColumn: number;
  /** 1-based cell number among all cells of a notebook (markdown included). */
  cell?: number;
}

export interface ReportEdit extends Position {
  /** Offsets (UTF-16 code units) into the analysed program: the file's text, or a notebook's joined code cells. */
  start: number;
  end: number;
  newText: string;
}

export interface ReportFix {
  title: string;
  kind: 'safe' | 'suggested';
  edits: ReportEdit[];
}

export interface ReportFinding extends Position {
  rule: string;
  level: Level;
  message: string;
  fixes: ReportFix[];
  related: (Position & { message: string })[];
  /** Stable across line shifts: rule, path, and the flagged code with its neighbourhood. */
  fingerprint: string;
}

export interface Summary {
  findings: number;
  files: number;
  byLevel: Record<Level, number>;
  byRule: Record<string, number>;
  skipped: number;
  baselined: number;
}

export interface Report {
  findings: ReportFinding[];
  skipped: Skipped[];
  summary: Summary;
}

/** Paths in reports are as given on the command line: relative to the current folder, forward slashes. */
export function displayPath(root: string, rel: string): string {
  return path.relative(process.cwd(), path.join(root, rel)).split(path.sep).join('/') || rel;
}

/** Line and column of an offset, for edits whose spans the rule gave as offsets only. */
export function offsetToPoint(text: string, offset: number): { line: number; col: number } {
  let line = 0;
  let lineStart = 0;
  for (let i = text.indexOf('\n'); i !== -1 && i < offset; i = text.indexOf('\n', i + 1)) {
    line++;
    lineStart = i + 1;
  }
  return { line, col: offset - lineStart };
}

export function position(root: string, file: SourceFile | undefined, p: string, span: Pick<Span, 'line' | 'col' | 'endLine' | 'endCol'>): Position {
  const cell = file ? toCell(file, span.line, span.col) : undefined;
  const endCell = file ? toCell(file, span.endLine, span.endCol) : undefined;
  return {
    path: displayPath(root, p),
    line: (cell ? cell.line : span.line) + 1,
    column: span.col + 1,
    endLine: (endCell && cell && endCell.cell === cell.cell ? endCell.line : cell ? cell.line : span.endLine) + 1,
    endColumn: (endCell && cell && endCell.cell !== cell.cell ? span.col : span.endCol) + 1,
    ...(cell ? { cell: cell.cell + 1 } : {}),
  };
}

/** The analysed program of a path (after fixes, when any were applied). */
export type SourceLookup = (path: string) => SourceFile | undefined;

export function toReportFinding(src: SourceLookup, root: string, f: Finding, fingerprint: string): ReportFinding {
  return {
    rule: f.rule,
    level: f.level,
    ...position(root, src(f.path), f.path, f.span),
    message: f.message,
    fixes: f.fixes.map((x) => ({
      title: x.title,
      kind: x.kind,
      edits: x.edits.map((e) => {
        const text = src(e.path)?.text ?? '';
        const a = offsetToPoint(text, e.start);
        const b = offsetToPoint(text, e.end);
        return { ...position(root, src(e.path), e.path, { line: a.line, col: a.col, endLine: b.line, endCol: b.col }), start: e.start, end: e.end, newText: e.newText };
      }),
    })),
    related: f.related.map((r) => ({ ...position(root, src(r.path), r.path, r.span), message: r.message })),
    fingerprint,
  };
}

export function summarize(findings: readonly ReportFinding[], skipped: readonly Skipped[], baselined: number): Summary {
  const byLevel = Object.fromEntries(LEVELS.map((l) => [l, 0])) as Record<Level, number>;
  const byRule: Record<string, number> = {};
  for (const f of findings) {
    byLevel[f.level]++;
    byRule[f.rule] = (byRule[f.rule] ?? 0) + 1;
  }
  return { findings: findings.length, files: new Set(findings.map((f) => f.path)).size, byLevel, byRule, skipped: skipped.length, baselined };
}

export function jsonReport(r: Report): string {
  const doc = {
    version: REPORT_FORMAT_VERSION,
    tool: { name: TOOL_NAME, version: VERSION, informationUri: INFORMATION_URI },
    findings: r.findings,
    skipped: r.skipped,
    summary: r.summary,
  };
  return `${JSON.stringify(doc, null, 2)}\n`;
}
