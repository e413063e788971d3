// Hover text: what the engine knows at a position (the layer built there, its resolved type, arguments and feeds)
// and the findings covering it, each with its rule's one-line why.
import type { Finding } from '../engine/types';
import type { Rule } from '../engine/rule';
import { originOf, pyRepr } from '../engine/values';
import { ModelGraphs, type Layer, type ModelGraph } from '../engine/views/model-graph';
import type { Views } from '../engine/views';

const HIDDEN_ARGS = new Set(['device', 'dtype']);
const MAX_NAMES = 6;

interface LayerHit {
  graph: ModelGraph;
  layer: Layer;
}

function shortType(t: string): string {
  const i = t.indexOf('::');
  return i >= 0 ? t.slice(i + 2) : t.replace(/^torch\.nn\./, 'nn.');
}

function basename(p: string): string {
  return p.slice(p.lastIndexOf('/') + 1);
}

/** Layers whose constructor call in `path` covers `offset`; the innermost call wins. */
export function layersAt(views: Views, path: string, offset: number): LayerHit[] {
  const hits: LayerHit[] = [];
  let best = Infinity;
  for (const graph of views.models.all()) {
    for (const layer of graph.layers) {
      const s = layer.site;
      if (!s || s.path !== path || offset < s.call.span.start || offset > s.call.span.end) continue;
      const size = s.call.span.end - s.call.span.start;
      if (size < best) {
        best = size;
        hits.length = 0;
      }
      if (size === best) hits.push({ graph, layer });
    }
  }
  return hits;
}

function layerSection(hits: LayerHit[]): string[] {
  const first = hits[0].layer;
  const out: string[] = [];
  const names = hits.map((h) => `\`${h.graph.className}.${h.layer.name}\``);
  const shown = names.slice(0, MAX_NAMES).join(', ') + (names.length > MAX_NAMES ? ` and ${names.length - MAX_NAMES} more` : '');
  out.push(`**Regwise** · layer ${shown}`);
  const args: string[] = [];
  const origins: string[] = [];
  for (const [k, v] of first.inst.args) {
    if (HIDDEN_ARGS.has(k)) continue;
    args.push(`${k}=${pyRepr(v)}`);
    const o = originOf(v);
    if (o && o.path !== first.site?.path) origins.push(`\`${k}\` from ${basename(o.path)}:${o.line + 1}${o.what ? ` (${o.what})` : ''}`);
  }
  out.push('', '```python', `${first.type}(${args.join(', ')})`, '```');
  const defaulted = [...first.inst.args.keys()].filter((k) => !first.inst.given.has(k) && !HIDDEN_ARGS.has(k));
  if (defaulted.length && first.inst.given.size) out.push(`Library defaults: ${defaulted.map((k) => `\`${k}\``).join(', ')}.`);
  if (origins.length) out.push(`Values ${origins.join(', ')}.`);
  const g = hits[0].graph;
  const from = ModelGraphs.producers(g, first);
  const to = ModelGraphs.consumers(g, first);
  if (g.traced) {
    const list = (ls: Layer[]) => ls.map((l) => `\`${l.name}\` (${shortType(l.type)})`).join(', ');
    out.push(`In \`${g.className}.forward\`: fed by ${from.length ? list(from) : 'no other layer directly'}; feeds ${to.length ? list(to) : 'no layer directly'}.`);
    if (first.input?.ch !== undefined) out.push(`Input channels: ${first.input.ch}.`);
  } else out.push(`\`${g.className}.forward\` could not be traced, so its feeds are unknown.`);
  return out;
}

export function hoverMarkdown(views: Views, path: string, offset: number, findings: readonly Finding[], rules: readonly Rule[]): string | undefined {
  const parts: string[] = [];
  const hits = layersAt(views, path, offset);
  if (hits.length) parts.push(...layerSection(hits));
  const here = findings.filter((f) => f.path === path && f.span.start <= offset && offset <= f.span.end);
  if (here.length) {
    if (!parts.length) parts.push('**Regwise**');
    parts.push('', 'Findings here:');
    for (const f of here) {
      const why = rules.find((r) => r.meta.id === f.rule)?.meta.summary;
      parts.push(`- \`${f.rule}\`: ${f.message}${why ? `\n  *Why:* ${why}` : ''}`);
    }
  }
  return parts.length ? parts.join('\n') : undefined;
}
