// batchnorm-tiny-batch: BatchNorm trained on a per-device batch below the threshold (or of one sample, where PyTorch raises).
import * as posix from 'node:path/posix';
import { defineRule } from '../server/src/engine/rule';
import type { Span } from '../server/src/engine/ir';
import type { Origin } from '../server/src/engine/values';
import { num } from '../server/src/engine/values';
import type { Related, TextEdit } from '../server/src/engine/types';
import { familyOf } from '../server/src/engine/torch-catalog';
import { nameModules } from '../server/src/engine/views/model-graph';
import { perDeviceBatch } from '../server/src/engine/views/training';
import { layerShortType } from './util';

export default defineRule({
  meta: {
    id: 'batchnorm-tiny-batch',
    title: 'BatchNorm on a tiny per-device batch',
    family: 'training',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A model with BatchNorm is trained on fewer samples per device than min-batch-per-device (traced from the DataLoader through constants, argparse defaults and config files), so its batch statistics are noisy; at one sample per channel PyTorch raises.',
    fix: 'suggested',
    sources: [
      'Wu & He, "Group Normalization", ECCV 2018: ResNet-50 ImageNet error about 34.7% with BatchNorm at 2 images per device vs 24.1% with GroupNorm (10.6 points)',
      'PyTorch torch/nn/functional.py: "Expected more than 1 value per channel when training"',
      'min-batch-per-device default 16: a rule of thumb (common practice)',
    ],
    messages: {
      tiny:
        '{norm} `{layer}` trains on {perDevice} per device: {chain}. Batch statistics over so few samples are noisy (Wu & He 2018: about 34.7% ResNet-50 ImageNet error with BatchNorm at 2 images per device, 24.1% with GroupNorm). Use a larger batch, GroupNorm, or SyncBatchNorm under DDP.',
      raises:
        '{norm} `{layer}` trains on {perDevice} per device: {chain}. With one value per channel PyTorch raises "Expected more than 1 value per channel when training". Use a larger batch, or GroupNorm/LayerNorm.',
    },
  },
  check(ctx) {
    const min = ctx.thresholds.minBatchPerDevice;
    const devices = ctx.thresholds.devicesPerProcess;
    for (const p of ctx.views.training.pairsTriggeredIn(ctx.path)) {
      const trigger = p.via[0]?.path ?? p.loop.path;
      // BatchNorm put in eval on purpose (frozen statistics for small-batch fine-tuning), or a loop in eval only
      if (!p.mode.t || p.partsEval) continue;
      const b = perDeviceBatch(p, devices);
      if (!b || !b.inst || b.synced) continue;
      const bns = nameModules(b.inst).filter(({ name, inst }) => name && inst.children.length === 0 && familyOf(inst.type) === 'batchnorm' && inst.site);
      if (!bns.length) continue;
      const seen = b.perDevice ?? b.batch;
      if (seen >= min) continue;
      const first = bns[0];
      const site = first.inst.site!;
      const type = layerShortType(first.inst.type);
      const raises = seen === 1 && type === 'BatchNorm1d';
      const chain = describeChain(b.batch, b.origin, b.defaulted, trigger, b.wrapper, b.perDevice, devices);
      const related: Related[] = [];
      const o = originSite(ctx, b.origin);
      if (o) related.push({ path: o.path, span: o.span, message: `batch_size ${b.batch} comes from here` });
      related.push({ path: p.loop.path, span: p.loop.span, message: 'training loop over this loader' });
      const sites = new Set<unknown>([site.call]);
      for (const other of bns.slice(1)) {
        if (sites.has(other.inst.site!.call)) continue;
        sites.add(other.inst.site!.call);
        related.push({ path: other.inst.site!.path, span: other.inst.site!.call.span, message: `${layerShortType(other.inst.type)} \`${other.name}\` sees the same batch` });
      }
      const fix = groupNormFix(ctx, bns.map((x) => x.inst.site!));
      ctx.report({
        messageId: raises ? 'raises' : 'tiny',
        level: raises ? 'error' : 'warning',
        data: { norm: type, layer: first.name, perDevice: b.perDevice === undefined ? `at most ${b.batch} samples` : `${seen} ${seen === 1 ? 'sample' : 'samples'}`, chain },
        path: site.path,
        span: site.call.span,
        related,
        fixes: fix && b.wrapper !== 'ddp' ? [{ title: 'Replace BatchNorm with GroupNorm', kind: 'suggested', edits: fix }] : [],
      });
    }
  },
});

function describeChain(batch: number, origin: Origin | undefined, defaulted: boolean, from: string, wrapper: 'ddp' | 'dp' | undefined, perDevice: number | undefined, devices: number | undefined): string {
  let s = defaulted ? 'the DataLoader default batch_size 1' : `batch_size ${batch}`;
  if (origin) {
    const rel = posix.relative(posix.dirname(from), origin.path) || posix.basename(origin.path);
    s += ` from ${rel}:${origin.line + 1}${origin.what ? ` (${origin.what})` : ''}`;
  }
  if (wrapper === 'dp') s += perDevice === undefined ? ', split further by nn.DataParallel across an unknown number of devices (set devices-per-process)' : `, split by nn.DataParallel across ${devices} devices`;
  if (wrapper === 'ddp') s += ' per process under DistributedDataParallel';
  return s;
}

function originSite(ctx: { ws: { dataFiles: Map<string, { text: string }> }; textOf(p: string): string }, o: Origin | undefined): { path: string; span: Span } | undefined {
  if (!o) return undefined;
  if (o.span) return { path: o.path, span: o.span };
  const data = ctx.ws.dataFiles.get(o.path);
  const text = data?.text ?? ctx.textOf(o.path);
  if (!text) return undefined;
  let start = 0;
  for (let i = 0; i < o.line; i++) {
    const nl = text.indexOf('\n', start);
    if (nl < 0) return undefined;
    start = nl + 1;
  }
  const nl = text.indexOf('\n', start);
  const end = nl < 0 ? text.length : nl;
  return { path: o.path, span: { start, end, line: o.line, col: 0, endLine: o.line, endCol: end - start } };
}

/** GroupNorm(G, C) for each `X.BatchNorm2d(C)` site with a known channel count; declines when any site is built otherwise. */
function groupNormFix(ctx: { textOf(p: string): string; edit(p: string, s: number, e: number, t: string): TextEdit }, sites: { path: string; call: import('../server/src/engine/ir').CallExpr }[]): TextEdit[] | undefined {
  const edits: TextEdit[] = [];
  const done = new Set<unknown>();
  for (const s of sites) {
    if (done.has(s.call)) continue;
    done.add(s.call);
    const c = s.call;
    if (c.fn.k !== 'attr' || !/^BatchNorm[123]d$/.test(c.fn.attr) || c.args.length !== 1 || c.kwargs.length || c.args[0].k !== 'num') return undefined;
    const ch = num({ t: 'num', v: c.args[0].value });
    if (!ch || !Number.isInteger(ch)) return undefined;
    // Wu & He's default of 32 groups when it divides the channels, else the largest divisor below both
    let g = 1;
    if (ch % 32 === 0) g = 32;
    else for (let d = Math.min(31, ch - 1); d >= 1; d--) if (ch % d === 0) { g = d; break; }
    const text = ctx.textOf(s.path);
    const prefix = text.slice(c.fn.obj.span.start, c.fn.obj.span.end);
    edits.push(ctx.edit(s.path, c.span.start, c.span.end, `${prefix}.GroupNorm(${g}, ${ch})`));
  }
  return edits.length ? edits : undefined;
}

