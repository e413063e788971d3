// The one place that turns engine findings, spans and edits into protocol diagnostics, locations and text edits.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { pathToFileURL } from 'node:url';
import {
  DiagnosticSeverity,
  DiagnosticTag,
  type Diagnostic,
  type DiagnosticRelatedInformation,
  type Location,
  type Range,
  type TextEdit,
} from 'vscode-languageserver/node';
import type { Finding, Level, TextEdit as EngineEdit } from '../engine/types';

/** Where program offsets of an engine path land in the editor: a document URI and a range in it. */
export interface Locator {
  locate(path: string, start: number, end: number): Location | undefined;
}

export const SEVERITY: Record<Level, DiagnosticSeverity> = {
  error: DiagnosticSeverity.Error,
  warning: DiagnosticSeverity.Warning,
  info: DiagnosticSeverity.Information,
  hint: DiagnosticSeverity.Hint,
};

/** What a diagnostic carries back to code-action requests: which finding it was. */
export interface DiagnosticData {
  key: string;
}

export function findingKey(f: Finding): string {
  return `${f.rule}\0${f.path}\0${f.span.start}\0${f.span.end}\0${f.messageId}`;
}

const docUris = new Map<string, string | undefined>();

/** The rule's page shipped beside the bundle (dist/rules/ID.md), as a file: URI; undefined when absent. */
export function ruleDocUri(rule: string): string | undefined {
  if (docUris.has(rule)) return docUris.get(rule);
  let found: string | undefined;
  for (const dir of [path.join(__dirname, 'rules'), path.join(__dirname, '..', '..', '..', 'rules')]) {
    const p = path.join(dir, `${rule}.md`);
    if (fs.existsSync(p)) {
      found = pathToFileURL(p).href;
      break;
    }
  }
  docUris.set(rule, found);
  return found;
}

export function toDiagnostic(f: Finding, loc: Locator): { uri: string; diagnostic: Diagnostic } | undefined {
  const at = loc.locate(f.path, f.span.start, f.span.end);
  if (!at) return undefined;
  const related: DiagnosticRelatedInformation[] = [];
  for (const r of f.related) {
    const l = loc.locate(r.path, r.span.start, r.span.end);
    if (l) related.push({ location: l, message: r.message });
  }
  const tags: DiagnosticTag[] = [];
  if (f.tags.includes('unnecessary')) tags.push(DiagnosticTag.Unnecessary);
  if (f.tags.includes('deprecated')) tags.push(DiagnosticTag.Deprecated);
  const href = ruleDocUri(f.rule);
  const diagnostic: Diagnostic = {
    range: at.range,
    severity: SEVERITY[f.level],
    source: 'regwise',
    code: f.rule,
    ...(href ? { codeDescription: { href } } : {}),
    message: f.message,
    ...(related.length ? { relatedInformation: related } : {}),
    ...(tags.length ? { tags } : {}),
    data: { key: findingKey(f) } satisfies DiagnosticData,
  };
  return { uri: at.uri, diagnostic };
}

/** Engine edits → protocol edits grouped by document; undefined when an edit cannot be placed (e.g. spans cells). */
export function toWorkspaceChanges(edits: readonly EngineEdit[], loc: Locator): Record<string, TextEdit[]> | undefined {
  const changes: Record<string, TextEdit[]> = {};
  for (const e of edits) {
    const l = loc.locate(e.path, e.start, e.end);
    if (!l) return undefined;
    (changes[l.uri] ??= []).push({ range: l.range, newText: e.newText });
  }
  return changes;
}

export function rangeContains(outer: Range, inner: Range): boolean {
  const before = (a: Range['start'], b: Range['start']) => a.line < b.line || (a.line === b.line && a.character <= b.character);
  return before(outer.start, inner.start) && before(inner.end, outer.end);
}

export function rangesOverlap(a: Range, b: Range): boolean {
  const lt = (x: Range['start'], y: Range['start']) => x.line < y.line || (x.line === y.line && x.character < y.character);
  // touching counts: a cursor at the end of a squiggle still asks about it
  return !lt(a.end, b.start) && !lt(b.end, a.start);
}
