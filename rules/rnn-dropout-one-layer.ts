// rnn-dropout-one-layer: nn.LSTM/GRU/RNN with dropout > 0 and one layer, where PyTorch's RNN dropout never applies.
import { defineRule } from '../server/src/engine/rule';
import { num } from '../server/src/engine/values';
import { layerShortType, pyNumber, removeKwargEdit } from './util';

const RNN_TYPES = new Set(['torch.nn.LSTM', 'torch.nn.GRU', 'torch.nn.RNN']);

export default defineRule({
  meta: {
    id: 'rnn-dropout-one-layer',
    title: 'RNN dropout on a single-layer RNN',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'An nn.LSTM/GRU/RNN with dropout > 0 and num_layers = 1: PyTorch applies this dropout only between stacked layers, so it does nothing.',
    fix: 'suggested',
    sources: [
      'PyTorch docs: torch.nn.LSTM, torch.nn.GRU, torch.nn.RNN (dropout on the outputs of each layer except the last); torch/nn/modules/rnn.py (warns when dropout > 0 and num_layers = 1)',
    ],
    messages: {
      oneLayer:
        '{type} `{layer}` has dropout={rate} but num_layers={layers}: PyTorch applies RNN dropout only to the outputs of each stacked layer except the last, so with one layer it never drops anything (PyTorch warns at construction). Add an nn.Dropout after the {type}, or stack layers with num_layers ≥ 2.',
    },
  },
  check(ctx) {
    for (const g of ctx.views.models.graphsIn(ctx.path)) {
      for (const l of g.layers) {
        if (!RNN_TYPES.has(l.type) || !l.site) continue;
        const rate = l.inst.args.get('dropout');
        const layers = num(l.inst.args.get('num_layers'));
        if (rate?.t !== 'num' || !(rate.v > 0) || layers !== 1) continue;
        const edit = removeKwargEdit(ctx.textOf(l.site.path), l.site.path, l.site.call, 'dropout');
        ctx.report({
          messageId: 'oneLayer',
          data: { type: layerShortType(l.type), layer: l.name, rate: pyNumber(rate.v), layers: 1 },
          path: l.site.path,
          span: l.site.call.span,
          fixes: edit ? [{ title: `Remove dropout=${pyNumber(rate.v)} from \`${l.name}\``, kind: 'suggested', edits: [edit] }] : [],
        });
      }
    }
  },
});
