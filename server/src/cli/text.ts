// The human report: `path:line:col level rule message`, the code line with a caret underline, then a summary.
import type { Finding, Level } from '../engine/types';
import type { Position, Report, SourceLookup } from './report';

export interface Style {
  bold(s: string): string;
  dim(s: string): string;
  level(l: Level, s: string): string;
}

const PLAIN: Style = { bold: (s) => s, dim: (s) => s, level: (_l, s) => s };
const sgr = (code: string) => (s: string) => `\x1b[${code}m${s}\x1b[0m`;
const LEVEL_SGR: Record<Level, string> = { error: '31;1', warning: '33;1', info: '36', hint: '2' };
const COLOUR: Style = { bold: sgr('1'), dim: sgr('2'), level: (l, s) => sgr(LEVEL_SGR[l])(s) };

/** Colour only on a terminal, and never when NO_COLOR is set to anything non-empty (no-color.org). */
export function chooseStyle(isTty: boolean, env: NodeJS.ProcessEnv): Style {
  return isTty && !env.NO_COLOR ? COLOUR : PLAIN;
}

/** The flagged line with a caret line under the flagged columns; tabs are copied so the carets line up. */
export function excerpt(text: string, line0: number, col0: number, endLine0: number, endCol0: number, lineLabel: number, style: Style): string[] {
  const lines = text.split('\n');
  const src = (lines[line0] ?? '').replace(/\r$/, '');
  if (!src.trim()) return [];
  const end = endLine0 === line0 ? Math.max(endCol0, col0 + 1) : src.length;
  const pad = src.slice(0, col0).replace(/[^\t]/g, ' ');
  const carets = '^'.repeat(Math.max(1, Math.min(end, src.length) - col0));
  const gutter = String(lineLabel).padStart(5);
  return [`${style.dim(`${gutter} |`)} ${src}`, `${style.dim(`${' '.repeat(5)} |`)} ${pad}${style.bold(carets)}`];
}

function where(f: Position): string {
  return f.cell !== undefined ? `${f.path}:cell ${f.cell}:${f.line}:${f.column}` : `${f.path}:${f.line}:${f.column}`;
}

export function textReport(src: SourceLookup, report: Report, originals: readonly Finding[], style: Style): string {
  const out: string[] = [];
  report.findings.forEach((f, i) => {
    const o = originals[i];
    out.push(`${style.bold(where(f))} ${style.level(f.level, f.level)} ${f.rule} ${f.message}`);
    const text = src(o.path)?.text;
    if (text !== undefined && o.rule !== 'internal-error') out.push(...excerpt(text, o.span.line, o.span.col, o.span.endLine, o.span.endCol, f.line, style));
    for (const r of f.related) out.push(`      ${style.dim('related:')} ${where(r)} ${r.message}`);
    const fix = f.fixes[0];
    if (fix) out.push(`      ${style.dim(`fix (${fix.kind}):`)} ${fix.title}`);
    out.push('');
  });
  const s = report.summary;
  const levels = (Object.entries(s.byLevel) as [Level, number][]).filter(([, n]) => n).map(([l, n]) => style.level(l, `${n} ${l}`));
  out.push(`${s.findings} finding${s.findings === 1 ? '' : 's'}${levels.length ? ` (${levels.join(', ')})` : ''} in ${s.files} file${s.files === 1 ? '' : 's'}${s.baselined ? `; ${s.baselined} known from the baseline not shown` : ''}${s.skipped ? `; ${s.skipped} file${s.skipped === 1 ? '' : 's'} skipped` : ''}`);
  const byRule = new Map<string, Map<Level, number>>();
  for (const f of report.findings) {
    const m = byRule.get(f.rule) ?? new Map<Level, number>();
    m.set(f.level, (m.get(f.level) ?? 0) + 1);
    byRule.set(f.rule, m);
  }
  const ids = [...byRule.keys()].sort();
  const w = Math.max(0, ...ids.map((id) => id.length));
  for (const id of ids) {
    const m = byRule.get(id)!;
    const n = [...m.values()].reduce((a, b) => a + b, 0);
    const parts = [...m.entries()].map(([l, k]) => style.level(l, `${k} ${l}`));
    out.push(`  ${id.padEnd(w)}  ${String(n).padStart(4)}  ${parts.join(', ')}`);
  }
  return `${out.join('\n')}\n`;
}
