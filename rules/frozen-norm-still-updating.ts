// frozen-norm-still-updating: parameters frozen for fine-tuning while that part's BatchNorm stays in train mode.
import { defineRule } from '../server/src/engine/rule';
import { BATCH_STAT_FAMILIES, familyOf } from '../server/src/engine/torch-catalog';
import { descendants, unwrap } from '../server/src/engine/views/training';
import { lineRef } from './util';

export default defineRule({
  meta: {
    id: 'frozen-norm-still-updating',
    title: 'Frozen part keeps updating BatchNorm statistics',
    family: 'training',
    level: 'info',
    frameworks: ['pytorch'],
    summary: 'A part of the model is frozen with requires_grad=False, but it is trained in train mode, so its BatchNorm running statistics keep moving toward the new data.',
    fix: 'none',
    sources: ['PyTorch docs: torch.nn.BatchNorm2d (running statistics are updated in training mode whenever track_running_stats=True, independent of requires_grad)'],
    messages: {
      updating:
        '`{part}` is frozen here, but it is still in training mode when the model trains ({stepAt}): requires_grad=False stops gradients, not the running statistics of its {layers}, which keep drifting toward the new data. Call `{part}.eval()` after each `.train()` of the model, or use a frozen BatchNorm.',
    },
  },
  check(ctx) {
    const seen = new Set<unknown>();
    for (const f of ctx.views.training.frozen) {
      if (f.freeze.path !== ctx.path || seen.has(f.freeze.call)) continue;
      const inst = unwrap(f.freeze.value).inst;
      if (!inst) continue;
      const n = descendants(inst).filter((m) => BATCH_STAT_FAMILIES.has(familyOf(m.type))).length;
      if (!n) continue;
      seen.add(f.freeze.call);
      ctx.report({
        messageId: 'updating',
        data: { part: f.freeze.text, stepAt: lineRef(f.point.path, f.point.span.line), layers: n === 1 ? '1 BatchNorm layer' : `${n} BatchNorm layers` },
        path: f.freeze.path,
        span: f.freeze.call.span,
        related: [{ path: f.point.path, span: f.point.span, message: 'trained here with the frozen part in training mode' }],
      });
    }
  },
});
