// mode-switch-not-called: `model.eval` / `model.train` written as a statement without the call, which does nothing.
import { defineRule } from '../server/src/engine/rule';

export default defineRule({
  meta: {
    id: 'mode-switch-not-called',
    title: 'Mode switch written without the call',
    family: 'training',
    level: 'error',
    frameworks: ['pytorch'],
    summary: 'A statement `model.eval` or `model.train` without parentheses only reads the method; the module stays in the mode it was in.',
    fix: 'safe',
    sources: ['PyTorch docs: torch.nn.Module.eval, torch.nn.Module.train (they set `training` only when called)'],
    messages: {
      notCalled: '`{recv}.{attr}` without parentheses only reads the method, so the mode of `{recv}` does not change here. Call it: `{recv}.{attr}()`.',
    },
  },
  check(ctx) {
    for (const b of ctx.views.training.bare) {
      if (b.path !== ctx.path) continue;
      const e = b.stmt.value;
      ctx.report({
        messageId: 'notCalled',
        data: { recv: b.recvText, attr: b.attr },
        path: b.path,
        span: e.span,
        fixes: [{ title: `Call \`${b.recvText}.${b.attr}()\``, kind: 'safe', edits: [ctx.edit(b.path, e.span.end, e.span.end, '()')] }],
      });
    }
  },
});
