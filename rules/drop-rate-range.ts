// drop-rate-range: a constant dropout rate outside [0, 1] (PyTorch raises), or so high it reads as a keep probability.
import { defineRule } from '../server/src/engine/rule';
import type { Expr, Span } from '../server/src/engine/ir';
import type { Related } from '../server/src/engine/types';
import { pyRepr, type Value } from '../server/src/engine/values';
import { layerSpec } from '../server/src/engine/torch-catalog';
import { callArg } from '../server/src/engine/views/model-graph';
import { functionalDropoutsIn } from '../server/src/engine/views/functional-dropout';
import { layerShortType, pyNumber } from './util';

export default defineRule({
  meta: {
    id: 'drop-rate-range',
    title: 'Dropout rate out of range or read as a keep probability',
    family: 'model',
    level: 'error',
    frameworks: ['pytorch'],
    summary: 'A constant dropout rate outside [0, 1] (PyTorch raises ValueError), or at or above the suspicious-drop-rate threshold, where a keep probability was probably passed as the drop probability.',
    fix: 'none',
    sources: [
      'PyTorch docs: torch.nn.Dropout (p = probability of an element to be zeroed; ValueError outside [0, 1]), torch.nn.functional.dropout, torch.nn.LSTM (dropout)',
      'Srivastava et al., "Dropout: A Simple Way to Prevent Neural Networks from Overfitting", JMLR 2014 (p is the retention probability there)',
    ],
    messages: {
      outOfRange:
        '{where}: {name}={value} is outside [0, 1], so {type} raises ValueError ({when}).{hint}',
      keepProbability:
        '{where}: {name}={value} zeroes {pct}% of {what}; if {value} was meant as the keep probability (Srivastava et al. 2014 use the retention probability), pass {name}={keep}.',
    },
  },
  check(ctx) {
    const reported = new Set<string>();
    const limit = ctx.thresholds.suspiciousDropRate;
    const report = (o: { where: string; type: string; name: string; value: Value; path: string; call: { span: Span }; expr?: Expr; what: string; when: string }) => {
      if (o.value.t !== 'num') return;
      const v = o.value.v;
      const inRange = v >= 0 && v <= 1;
      if (inRange && v < limit) return;
      const span = o.expr?.span ?? o.call.span;
      const key = `${o.path}\0${span.start}`;
      if (reported.has(key)) return;
      reported.add(key);
      const related: Related[] = [];
      const origin = o.value.origin;
      // a named constant defined elsewhere: point at the definition too
      if (origin?.span && !(origin.path === o.path && origin.span.start >= span.start && origin.span.end <= span.end)) {
        related.push({ path: origin.path, span: origin.span, message: `${pyRepr(o.value)} is set here` });
      }
      if (!inRange) {
        ctx.report({
          messageId: 'outOfRange',
          data: {
            where: o.where, name: o.name, value: pyRepr(o.value), type: o.type, when: o.when,
            hint: Number.isInteger(v) && v >= 2 && v <= 100 ? ` If ${pyRepr(o.value)}% was meant, pass ${o.name}=${pyNumber(v / 100)}.` : '',
          },
          path: o.path, span, level: 'error', related,
        });
      } else {
        ctx.report({
          messageId: 'keepProbability',
          data: { where: o.where, name: o.name, value: pyRepr(o.value), pct: pyNumber(v * 100), what: o.what, keep: pyNumber(1 - v) },
          path: o.path, span, level: 'warning', related,
        });
      }
    };
    for (const g of ctx.views.models.graphsIn(ctx.path)) {
      for (const l of g.layers) {
        const isDrop = l.family === 'dropout' || l.family === 'alphadropout';
        const isRnn = l.family === 'rnn';
        if ((!isDrop && !isRnn) || !l.site) continue;
        const name = isDrop ? 'p' : 'dropout';
        if (!l.inst.given.has(name)) continue;
        const index = layerSpec(l.type)?.params.findIndex((p) => p.name === name) ?? -1;
        const arg = callArg(l.site.call, index, name);
        report({
          where: `${layerShortType(l.type)} \`${l.name}\``, type: layerShortType(l.type), name, value: l.inst.args.get(name)!,
          path: l.site.path, call: l.site.call, expr: arg.given === 'yes' ? arg.expr : undefined,
          what: isDrop ? 'activations in training' : 'the outputs passed between stacked layers in training',
          when: 'at construction',
        });
      }
    }
    for (const d of functionalDropoutsIn(ctx.views.models, ctx.path)) {
      if (!d.pExpr) continue;
      const fn = d.q.replace(/^torch\.nn\.functional\./, 'F.');
      report({
        where: `\`${fn}\``, type: fn, name: 'p', value: d.p, path: d.path, call: d.call, expr: d.pExpr,
        what: 'activations', when: 'at the first forward call',
      });
    }
  },
});
