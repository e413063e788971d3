// batchnorm-unsynced-ddp: a DDP-wrapped BatchNorm model with a small per-process batch and no SyncBatchNorm conversion.
import { defineRule } from '../server/src/engine/rule';
import { familyOf } from '../server/src/engine/torch-catalog';
import { descendants, perDeviceBatch, unwrap } from '../server/src/engine/views/training';
import { insertLineBefore } from './line-edits';
import { layerShortType } from './util';

export default defineRule({
  meta: {
    id: 'batchnorm-unsynced-ddp',
    title: 'BatchNorm not synchronised under DDP',
    family: 'training',
    level: 'info',
    frameworks: ['pytorch'],
    summary: 'A model with BatchNorm is wrapped in DistributedDataParallel without SyncBatchNorm.convert_sync_batchnorm while each process trains on a small batch, so every process normalizes over its own few samples.',
    fix: 'suggested',
    sources: [
      'PyTorch docs: torch.nn.SyncBatchNorm.convert_sync_batchnorm (convert before wrapping in DistributedDataParallel)',
      'Wu & He, "Group Normalization", ECCV 2018 (BatchNorm error grows as the per-device batch shrinks)',
    ],
    messages: {
      unsynced:
        '{type} is wrapped in DistributedDataParallel with {layers} and {batch} samples per process: each process normalizes over its own {batch} samples only. Convert with `SyncBatchNorm.convert_sync_batchnorm` before wrapping to use the statistics of the whole global batch.',
    },
  },
  check(ctx) {
    const t = ctx.views.training;
    for (const w of t.ddp) {
      if (w.path !== ctx.path || !w.inner || w.synced) continue;
      const n = descendants(w.inner).filter((m) => familyOf(m.type) === 'batchnorm').length;
      if (!n) continue;
      let batch: number | undefined;
      for (const p of t.pairs) {
        const b = perDeviceBatch(p, ctx.thresholds.devicesPerProcess);
        if (b && b.inst === w.inner && b.perDevice !== undefined) batch = Math.min(batch ?? Infinity, b.perDevice);
      }
      if (batch === undefined || batch >= ctx.thresholds.minBatchPerDevice) continue;
      const a = w.call.args[0];
      let name: string | undefined;
      if (a?.k === 'name') name = a.id;
      else if (a?.k === 'call' && a.fn.k === 'attr' && (a.fn.attr === 'to' || a.fn.attr === 'cuda') && a.fn.obj.k === 'name') name = a.fn.obj.id;
      const ns = t.syncPrefix(w.path);
      const edit = name && ns ? insertLineBefore(ctx.textOf(w.path), w.path, w.stmt, `${name} = ${ns}.SyncBatchNorm.convert_sync_batchnorm(${name})`) : undefined;
      ctx.report({
        messageId: 'unsynced',
        data: { type: layerShortType(w.inner.type), layers: n === 1 ? '1 BatchNorm layer' : `${n} BatchNorm layers`, batch },
        path: w.path,
        span: w.call.span,
        fixes: edit ? [{ title: 'Convert BatchNorm to SyncBatchNorm before wrapping', kind: 'suggested', edits: [edit] }] : [],
      });
    }
  },
});
