// train-mode-not-restored: eval() inside a training loop with no train() before the next backward()/step() on some path.
import { defineRule } from '../server/src/engine/rule';
import { lineRef } from './util';
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
    messages: {
      notRestored:
        '`{eval}` in {fn}() ({evalAt}) leaves `{model}` in evaluation mode, and the loop at {loopAt} trains it again at `{step}` ({stepAt}) with no `{model}.train()` in between: from the second pass on it learns with dropout off and BatchNorm frozen. Call `{model}.train()` at the top of the loop body.',
    },
  },
  check(ctx) {
    const seen = new Set<string>();
    for (const r of ctx.views.training.resumes) {
      if (r.origin.report.path !== ctx.path) continue;
      const key = `${r.origin.report.span.start}\0${r.path}\0${r.loop.span.start}`;
      if (seen.has(key)) continue;
      seen.add(key);
      const first = r.loop.body[0];
      const edit = first ? insertLineBefore(ctx.textOf(r.path), r.path, first, `${r.text}.train()`) : undefined;
      ctx.report({
        messageId: 'notRestored',
        data: {
          eval: r.origin.text,
          fn: r.origin.fn,
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
