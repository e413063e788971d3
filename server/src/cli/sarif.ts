// The SARIF 2.1.0 report (OASIS): rule descriptors with their docs, results with stable fingerprints and fixes.
import { INTERNAL_RULE } from '../engine/engine';
import type { Rule } from '../engine/rule';
import type { Finding, Level } from '../engine/types';
import type { Report, ReportFinding, Position, SourceLookup } from './report';
import { offsetToPoint } from './report';
import { INFORMATION_URI, TOOL_NAME, VERSION } from './version';

export const SARIF_SCHEMA = 'https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json';
export const FINGERPRINT_KEY = 'regwiseFindingHash/v1';

const SARIF_LEVEL: Record<Level, 'error' | 'warning' | 'note'> = { error: 'error', warning: 'warning', info: 'note', hint: 'note' };

/** A `## Heading` section of a rule's documentation page. */
export function docSection(doc: string | undefined, heading: string): string | undefined {
  if (!doc) return undefined;
  const lines = doc.split('\n');
  const at = lines.findIndex((l) => l.trim().toLowerCase() === `## ${heading.toLowerCase()}`);
  if (at < 0) return undefined;
  const body: string[] = [];
  for (let i = at + 1; i < lines.length && !/^##?\s/.test(lines[i]); i++) body.push(lines[i]);
  return body.join('\n').trim() || undefined;
}

function descriptor(rule: Rule, doc: string | undefined) {
  const m = rule.meta;
  const why = docSection(doc, 'Why it matters');
  const how = docSection(doc, 'How to fix');
  const sources = m.sources.length ? `\n\nSources:\n${m.sources.map((s) => `- ${s}`).join('\n')}` : '';
  return {
    id: m.id,
    name: m.id.replace(/(^|-)([a-z0-9])/g, (_, _d: string, c: string) => c.toUpperCase()),
    shortDescription: { text: m.title },
    fullDescription: { text: why ? `${m.summary} ${why.replace(/\s*\n\s*/g, ' ')}` : m.summary },
    help: {
      text: `${how ? how.replace(/\s*\n\s*/g, ' ') : m.summary}${sources}`,
      ...(doc ? { markdown: doc } : {}),
    },
    helpUri: `${INFORMATION_URI}/blob/main/rules/${m.id}.md`,
    defaultConfiguration: { level: SARIF_LEVEL[m.level] },
    properties: { family: m.family, frameworks: m.frameworks, fix: m.fix, tags: [m.family, ...m.frameworks] },
  };
}

const INTERNAL_DESCRIPTOR = {
  id: INTERNAL_RULE,
  name: 'InternalError',
  shortDescription: { text: 'A rule failed on a file' },
  fullDescription: { text: 'A rule raised an error while checking this file; its findings for the file are missing. The rest of the scan went on.' },
  help: { text: 'Report the file and the message to the Regwise maintainers; the other rules still checked the file.' },
  helpUri: `${INFORMATION_URI}/issues`,
  defaultConfiguration: { level: 'error' as const },
  properties: { family: 'internal' },
};

function uri(p: string): string {
  return p.split('/').map(encodeURIComponent).join('/');
}

function isNotebook(p: Position): boolean {
  return p.cell !== undefined;
}

/** Plain files get a region; a notebook's positions are in its cells, so the file is the location and the cell goes in properties. */
function physical(p: Position) {
  const artifactLocation = { uri: uri(p.path), uriBaseId: '%SRCROOT%' };
  if (isNotebook(p)) return { physicalLocation: { artifactLocation }, properties: { cell: p.cell, line: p.line, column: p.column, endLine: p.endLine, endColumn: p.endColumn } };
  return { physicalLocation: { artifactLocation, region: { startLine: p.line, startColumn: p.column, endLine: p.endLine, endColumn: p.endColumn } } };
}

function sarifFixes(src: SourceLookup, f: ReportFinding, o: Finding) {
  if (isNotebook(f)) return undefined;
  const out = f.fixes.flatMap((fix, i) => {
    const edits = o.fixes[i].edits;
    if (edits.some((e) => src(e.path)?.cells)) return [];
    const byPath = new Map<string, { deletedRegion: object; insertedContent: { text: string } }[]>();
    fix.edits.forEach((e, j) => {
      const text = src(edits[j].path)?.text ?? '';
      const a = offsetToPoint(text, edits[j].start);
      const b = offsetToPoint(text, edits[j].end);
      const list = byPath.get(e.path) ?? [];
      list.push({ deletedRegion: { startLine: a.line + 1, startColumn: a.col + 1, endLine: b.line + 1, endColumn: b.col + 1 }, insertedContent: { text: e.newText } });
      byPath.set(e.path, list);
    });
    return [{
      description: { text: `${fix.title} (${fix.kind})` },
      artifactChanges: [...byPath].map(([p, replacements]) => ({ artifactLocation: { uri: uri(p), uriBaseId: '%SRCROOT%' }, replacements })),
    }];
  });
  return out.length ? out : undefined;
}

export function sarifReport(src: SourceLookup, report: Report, originals: readonly Finding[], rules: readonly Rule[], readDoc: (id: string) => string | undefined, cwd: string): string {
  const descriptors = [...rules.map((r) => descriptor(r, readDoc(r.meta.id))), INTERNAL_DESCRIPTOR];
  const index = new Map(descriptors.map((d, i) => [d.id, i]));
  const results = report.findings.map((f, i) => {
    const o = originals[i];
    const loc = physical(f);
    const fixes = sarifFixes(src, f, o);
    return {
      ruleId: f.rule,
      ...(index.has(f.rule) ? { ruleIndex: index.get(f.rule) } : {}),
      level: SARIF_LEVEL[f.level],
      message: { text: f.message },
      locations: [loc],
      ...(f.related.length ? { relatedLocations: f.related.map((r, k) => ({ id: k + 1, ...physical(r), message: { text: r.message } })) } : {}),
      partialFingerprints: { [FINGERPRINT_KEY]: f.fingerprint },
      ...(fixes ? { fixes } : {}),
      ...(f.cell !== undefined ? { properties: { cell: f.cell } } : {}),
    };
  });
  const doc = {
    $schema: SARIF_SCHEMA,
    version: '2.1.0',
    runs: [{
      tool: { driver: { name: TOOL_NAME, version: VERSION, semanticVersion: VERSION, informationUri: INFORMATION_URI, rules: descriptors } },
      originalUriBaseIds: { '%SRCROOT%': { uri: `file://${cwd.split('/').map(encodeURIComponent).join('/').replace(/\/?$/, '/')}` } },
      invocations: [{
        executionSuccessful: true,
        toolExecutionNotifications: report.skipped.map((s) => ({
          level: 'warning',
          message: { text: `skipped: ${s.reason}` },
          locations: [{ physicalLocation: { artifactLocation: { uri: uri(s.path), uriBaseId: '%SRCROOT%' } } }],
        })),
      }],
      columnKind: 'utf16CodeUnits',
      results,
    }],
  };
  return `${JSON.stringify(doc, null, 2)}\n`;
}
