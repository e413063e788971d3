// decay-on-norm-and-bias: weight decay on all parameters of a model with norm layers (scales, shifts and biases included).
import { defineRule } from '../server/src/engine/rule';
import { num, originOf, truthy } from '../server/src/engine/values';
import { descendants, unwrap } from '../server/src/engine/views/training';
import { NORM_FAMILIES, familyOf } from '../server/src/engine/torch-catalog';
import { layerShortType, pyNumber } from './util';
import * as posix from 'node:path/posix';

export default defineRule({
  meta: {
    id: 'decay-on-norm-and-bias',
    title: 'Weight decay on normalization parameters and biases',
    family: 'training',
    level: 'hint',
    frameworks: ['pytorch'],
    summary: 'The optimizer decays every parameter of a model with normalization layers, their scales and shifts and all biases included; common practice exempts them with parameter groups.',
    fix: 'none',
    sources: ['He et al., "Bag of Tricks for Image Classification with Convolutional Neural Networks", CVPR 2019 (no decay on biases and BN parameters)'],
    messages: {
      allParams:
        'Weight decay {wd}{from} applies to every parameter of {type}, including the scales and shifts of its {layers} and every bias. Common practice leaves those out: pass parameter groups with weight_decay 0 for biases and norm parameters.',
    },
  },
  check(ctx) {
    for (const o of ctx.views.training.optimizers) {
      if (o.path !== ctx.path || !o.paramsOf) continue;
      const wd = num(o.weightDecay);
      if (wd === undefined || wd <= 0) continue;
      const inst = unwrap(o.paramsOf).inst;
      if (!inst) continue;
      const norms = descendants(inst).filter((m) => {
        const fam = familyOf(m.type);
        if (!NORM_FAMILIES.has(fam)) return false;
        const affine = m.args.get(fam === 'layernorm' ? 'elementwise_affine' : 'affine');
        return truthy(affine) === true;
      });
      if (!norms.length) continue;
      const origin = originOf(o.weightDecay);
      const from = origin && (origin.what || origin.path !== o.path)
        ? ` (${posix.relative(posix.dirname(o.path), origin.path) || posix.basename(origin.path)}:${origin.line + 1}${origin.what ? ` ${origin.what}` : ''})`
        : o.weightDecayGiven ? '' : ` (the ${layerShortType(o.type)} default)`;
      ctx.report({
        messageId: 'allParams',
        data: { wd: pyNumber(wd), from, type: layerShortType(inst.type), layers: norms.length === 1 ? '1 normalization layer' : `${norms.length} normalization layers` },
        path: o.path,
        span: o.call.span,
      });
    }
  },
});
