// train-mode-not-restored: eval() inside a training loop with no train() before the next backward()/step() on some path.
import { defineRule } from '../server/src/engine/rule';
import { lineRef, scopeLabel } from './util';
import { insertLineBefore } from './line-edits';

export default defineRule({
  meta: {
    id: 'train-mode-not-restored',
    title: 'Training resumes in evaluation mode',
    family: 'training',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A module put in eval mode inside a training loop (often by a validation call) is trained again on the next pass without `.train()`, so dropout is off and BatchNorm stops using batch statistics while it learns.',
    fix: 'safe',
    sources: ['PyTorch docs: torch.nn.Module.train, torch.nn.Module.eval (the mode stays until switched again)'],
    // what the message says the module loses depends on the layers it is known to have; a module whose class the view
    // cannot see gets the conditional wording, and one known to have neither dropout nor BatchNorm no finding
    messages: {
      notRestored:
        '`{eval}` in {fn} ({evalAt}) leaves `{model}` in evaluation mode, and the loop at {loopAt} trains it again at `{step}` ({stepAt}) with no `{model}.train()` in between: from the second pass on it learns with its dropout off and its normalization layers using running statistics instead of batch statistics ({what}). Call `{model}.train()` at the top of the loop body.',
      notRestoredDropout:
        '`{eval}` in {fn} ({evalAt}) leaves `{model}` in evaluation mode, and the loop at {loopAt} trains it again at `{step}` ({stepAt}) with no `{model}.train()` in between: from the second pass on it learns with its dropout off ({what}). Call `{model}.train()` at the top of the loop body.',
      notRestoredNorm:
        '`{eval}` in {fn} ({evalAt}) leaves `{model}` in evaluation mode, and the loop at {loopAt} trains it again at `{step}` ({stepAt}) with no `{model}.train()` in between: from the second pass on its normalization layers ({what}) use running statistics instead of batch statistics while it learns, and stop updating them. Call `{model}.train()` at the top of the loop body.',
      notRestoredLibrary:
        '`{eval}` in {fn} ({evalAt}) leaves `{model}` in evaluation mode, and the loop at {loopAt} trains it again at `{step}` ({stepAt}) with no `{model}.train()` in between: from the second pass on the dropout or normalization layers {type} is built with behave as in evaluation while it learns. Call `{model}.train()` at the top of the loop body.',
      notRestoredUnseen:
        '`{eval}` in {fn} ({evalAt}) leaves `{model}` in evaluation mode, and the loop at {loopAt} trains it again at `{step}` ({stepAt}) with no `{model}.train()` in between: from the second pass on it learns in evaluation mode, so any dropout it has is off and any BatchNorm uses running statistics instead of batch statistics. Call `{model}.train()` at the top of the loop body.',
    },
  },
  check(ctx) {
    const t = ctx.views.training;
    // one finding per eval and loop; where several resumes share them, the one whose module is best known speaks
    const best = new Map<string, { r: (typeof t.resumes)[number]; caring: ReturnType<typeof t.caring> }>();
    for (const r of t.resumes) {
      if (r.origin.report.path !== ctx.path) continue;
      const caring = t.caring(r.point.ref.value);
      // known to have neither dropout nor BatchNorm: the mode changes nothing it computes
      if (caring && !caring.cares) continue;
      const key = `${r.origin.report.span.start}\0${r.path}\0${r.loop.span.start}`;
      const had = best.get(key);
      if (!had || (!had.caring && caring) || (had.caring && !had.caring.seen && caring?.seen)) best.set(key, { r, caring });
    }
    for (const { r, caring } of best.values()) {
      const first = r.loop.body[0];
      const edit = first ? insertLineBefore(ctx.textOf(r.path), r.path, first, `${r.text}.train()`) : undefined;
      const messageId = !caring ? 'notRestoredUnseen' : !caring.seen ? 'notRestoredLibrary'
        : caring.dropout && caring.batchStats ? 'notRestored' : caring.dropout ? 'notRestoredDropout' : 'notRestoredNorm';
      ctx.report({
        messageId,
        data: {
          what: caring?.what ?? '',
          type: caring?.type ?? '',
          eval: r.origin.text,
          fn: scopeLabel(r.origin.fn),
          evalAt: lineRef(r.origin.report.path, r.origin.report.span.line),
          model: r.text,
          loopAt: lineRef(r.path, r.loop.span.line),
          step: r.point.reportText,
          stepAt: lineRef(r.point.report.path, r.point.report.span.line),
        },
        path: r.origin.report.path,
        span: r.origin.report.span,
        related: [
          { path: r.path, span: r.loop.span, message: 'this loop trains the module again on its next pass' },
          { path: r.point.report.path, span: r.point.report.span, message: 'training step reached in evaluation mode' },
        ],
        fixes: edit ? [{ title: `Insert \`${r.text}.train()\` at the top of the loop body`, kind: 'safe', edits: [edit] }] : [],
      });
    }
  },
});
