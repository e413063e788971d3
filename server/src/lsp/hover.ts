// Hover text: what the views know at a position (a layer's names, resolved type, arguments, feeds and training batch;
// a DataLoader's batch and where it came from; a mode switch or evaluation region) and the findings there with a why.
import type { Finding } from '../engine/types';
import type { Rule } from '../engine/rule';
import { originOf, pyRepr } from '../engine/values';
import { ModelGraphs, nameModules, type Layer, type ModelGraph } from '../engine/views/model-graph';
import type { Views } from '../engine/views';
import { isLoader, perDeviceBatch, unwrap, type Mode } from '../engine/views/training';
import type { Thresholds } from '../engine/types';

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

/** For a normalization layer: the per-device batch each training loop feeds the model that owns it. */
function batchSection(views: Views, hits: LayerHit[], thresholds: Thresholds): string[] {
  const first = hits[0].layer;
  if (first.family !== 'batchnorm' && first.family !== 'syncbatchnorm') return [];
  // the training loop's model is its own instance: match layers by the constructor call that built them
  const site = first.site;
  if (!site) return [];
  const same = (i: { site?: { path: string; call: { span: { start: number } } } }) => i.site?.path === site.path && i.site.call.span.start === site.call.span.start;
  const out: string[] = [];
  for (const p of views.training.pairs) {
    const b = perDeviceBatch(p, thresholds.devicesPerProcess);
    if (!b?.inst) continue;
    const named = nameModules(b.inst).find((m) => same(m.inst));
    if (!named) continue;
    const per = b.perDevice !== undefined ? `${b.perDevice} sample${b.perDevice === 1 ? '' : 's'} per device` : 'an unknown number of samples per device';
    const from = b.defaulted ? 'the DataLoader default batch_size 1' : b.origin ? `batch_size ${b.batch} from ${basename(b.origin.path)}:${b.origin.line + 1}${b.origin.what ? ` (${b.origin.what})` : ''}` : `batch_size ${b.batch}`;
    out.push(`- as \`${shortType(b.inst.type)}.${named.name}\`, trains on ${per} (${from}${b.wrapper === 'ddp' ? ', per DDP process' : b.wrapper === 'dp' ? ', split by nn.DataParallel' : ''}) in the loop at ${basename(p.loop.path)}:${p.loop.span.line + 1}${b.synced ? '; statistics synchronised across processes' : ''}`);
  }
  return out.length ? ['Training batches:', ...out] : [];
}

const inside = (span: { start: number; end: number }, offset: number) => span.start <= offset && offset <= span.end;

/** A DataLoader built here: its batch size and where it came from, and what each model it trains sees per device. */
function loaderSection(views: Views, path: string, offset: number, thresholds: Thresholds): string[] {
  const out: string[] = [];
  for (const p of views.training.pairs) {
    const l = p.loader;
    if (!isLoader(l) || !l.site || l.site.path !== path || !inside(l.site.call.span, offset)) continue;
    const b = perDeviceBatch(p, thresholds.devicesPerProcess);
    if (!out.length) {
      out.push('**Regwise** · DataLoader');
      if (b) {
        const o = b.origin;
        out.push('', `batch_size = ${b.batch}${b.defaulted ? ' (the DataLoader default)' : o ? ` (from ${basename(o.path)}:${o.line + 1}${o.what ? `, ${o.what}` : ''})` : ''}`);
      }
    }
    const u = unwrap(p.model);
    const model = u.inst ? `\`${shortType(u.inst.type)}\`` : 'the model';
    const per = b?.perDevice !== undefined ? `${b.perDevice} sample${b.perDevice === 1 ? '' : 's'} per device per step` : 'an unknown number of samples per device';
    const wrap = u.wrapper === 'ddp' ? ` under DistributedDataParallel${u.synced ? ' (SyncBatchNorm)' : ''}` : u.wrapper === 'dp' ? ' under nn.DataParallel' : '';
    out.push(`- trains ${model}${wrap} in the loop at ${basename(p.loop.path)}:${p.loop.span.line + 1}: ${per}`);
  }
  return out;
}

function describeMode(m: Mode): string {
  const parts: string[] = [];
  if (m.t) parts.push('train mode');
  for (const o of m.e) parts.push(`eval mode (set by \`${o.text}\` in \`${o.fn}\`, ${basename(o.report.path)}:${o.report.span.line + 1})`);
  if (m.n) parts.push('whatever mode its caller left it in');
  if (m.u) parts.push('a mode Regwise cannot follow');
  return parts.join(' or ') || 'no known mode';
}

/** A mode switch here (what it reaches), or an evaluation region here (the module's mode inside it). */
function modeSection(views: Views, path: string, offset: number): string[] {
  const out: string[] = [];
  const seen = new Set<string>();
  for (const ev of views.training.evals) {
    if (ev.region.path === path && inside(ev.region.span, offset)) {
      const k = `r${ev.region.span.start}${ev.ref.key}`;
      if (seen.has(k)) continue;
      seen.add(k);
      if (!out.length) out.push('**Regwise** · evaluation region');
      out.push(`- \`${ev.ref.text}\` is in ${describeMode(ev.mode)} here`);
    }
    for (const o of ev.mode.e) {
      if (o.report.path !== path || !inside(o.report.span, offset)) continue;
      const k = `s${o.report.span.start}${ev.region.span.start}`;
      if (seen.has(k)) continue;
      seen.add(k);
      if (!out.length) out.push(`**Regwise** · mode switch \`${o.text}\``);
      out.push(`- puts the module in eval mode for the evaluation region in \`${ev.fnName}\` (${basename(ev.region.path)}:${ev.region.span.line + 1})`);
    }
  }
  return out;
}

/** Runs one hover section; a view that fails leaves that section out instead of losing the whole hover. */
function section(parts: string[], make: () => string[], onError: (err: unknown) => void): void {
  try {
    const lines = make();
    if (lines.length) parts.push(...(parts.length ? ['', '---', ''] : []), ...lines);
  } catch (err) {
    onError(err);
  }
}

export function hoverMarkdown(
  views: Views,
  path: string,
  offset: number,
  findings: readonly Finding[],
  rules: readonly Rule[],
  thresholds: Thresholds,
  onError: (err: unknown) => void = () => undefined,
): string | undefined {
  const parts: string[] = [];
  section(parts, () => {
    const hits = layersAt(views, path, offset);
    return hits.length ? layerSection(hits) : [];
  }, onError);
  section(parts, () => {
    const hits = layersAt(views, path, offset);
    return hits.length ? batchSection(views, hits, thresholds) : [];
  }, onError);
  section(parts, () => loaderSection(views, path, offset, thresholds), onError);
  section(parts, () => modeSection(views, path, offset), onError);
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
