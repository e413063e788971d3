// eval-mode-missing: a module with dropout or BatchNorm evaluated (no_grad/inference_mode) while it may be in training mode.
import { defineRule } from '../server/src/engine/rule';
import { lineRef, scopeLabel } from './util';
import { insertLineBefore } from './line-edits';

export default defineRule({
  meta: {
    id: 'eval-mode-missing',
    title: 'Evaluation without eval()',
    family: 'training',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A module with dropout or BatchNorm is run for evaluation or inference while no `.eval()` reaches it on every path, so dropout still drops and BatchNorm still uses and updates batch statistics.',
    fix: 'safe',
    sources: [
      'PyTorch autograd notes, "Locally disabling gradient computation" (no_grad and inference_mode do not change the module mode)',
      'PyTorch docs: torch.nn.Module.eval, torch.nn.Dropout, torch.nn.BatchNorm2d',
    ],
    // one message per kind of layer present: a model with only dropout is not told about batch statistics
    messages: {
      missing:
        '{type} `{model}` is evaluated under `{region}` in {fn} but may still be in training mode{via}: its layers ({what}) behave as in training: dropout keeps dropping activations, and normalization keeps using the statistics of the evaluated inputs and updating its running statistics. Call `{model}.eval()` before the region.',
      missingDropout:
        '{type} `{model}` is evaluated under `{region}` in {fn} but may still be in training mode{via}: its dropout layers ({what}) keep dropping activations, so the outputs are random. Call `{model}.eval()` before the region.',
      missingNorm:
        '{type} `{model}` is evaluated under `{region}` in {fn} but may still be in training mode{via}: its normalization layers ({what}) keep using the statistics of the evaluated inputs instead of their running statistics, and keep updating those. Call `{model}.eval()` before the region.',
      missingLibrary:
        '{type} `{model}` is evaluated under `{region}` in {fn} but may still be in training mode{via}: {type} is built with dropout or normalization layers, which behave as in training until `.eval()`. Call `{model}.eval()` before the region.',
    },
  },
  check(ctx) {
    for (const ev of ctx.views.training.evalFindings()) {
      if (ev.region.path !== ctx.path) continue;
      const text = ctx.textOf(ev.region.path);
      // a bare `model.eval` earlier in the same block has its own fix (add the call), which also ends this finding:
      // offering both would insert a second, redundant switch
      const pendingCall = ctx.views.training.bare.some((b) =>
        b.path === ev.insertPath && b.attr === 'eval' && b.recvText === ev.ref.text && sameBlockBefore(text, b.stmt.span.end, ev.insertBefore.span.start, b.stmt.span.col));
      const edit = ev.fixable && !pendingCall ? insertLineBefore(text, ev.insertPath, ev.insertBefore, `${ev.ref.text}.eval()`) : undefined;
      const via = ev.via.length ? ` (as called from ${lineRef(ev.via[0].path, ev.via[0].span.line)})` : '';
      const c = ev.caring;
      ctx.report({
        messageId: !c.seen ? 'missingLibrary' : c.dropout && c.batchStats ? 'missing' : c.dropout ? 'missingDropout' : 'missingNorm',
        data: {
          type: ev.caring.type,
          model: ev.ref.text,
          region: text.slice(ev.region.span.start, ev.region.span.end),
          fn: scopeLabel(ev.fnName),
          via,
          what: ev.caring.what,
        },
        path: ev.region.path,
        span: ev.region.span,
        related: ev.via.map((s) => ({ path: s.path, span: s.span, message: 'called here with the module in training mode on some path' })),
        fixes: edit ? [{ title: `Insert \`${ev.ref.text}.eval()\` before the evaluation`, kind: 'safe', edits: [edit] }] : [],
      });
    }
  },
});

/** True when every non-blank line from `from` to `to` is indented at least `col`: still the block `from` is in. */
function sameBlockBefore(text: string, from: number, to: number, col: number): boolean {
  if (from > to) return false;
  for (const line of text.slice(from, to).split('\n').slice(1)) {
    if (!line.trim() || line.trimStart().startsWith('#')) continue;
    if (line.length - line.trimStart().length < col) return false;
  }
  return true;
}
