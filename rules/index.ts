// The rule registry: an explicit list (not a folder scan). A parity test checks it against docs, tests and schemas.
import type { Rule } from '../server/src/engine/rule';
import biasBeforeNorm from './bias-before-norm';
import seluPlainDropout from './selu-plain-dropout';
import alphaDropoutWithoutSelu from './alpha-dropout-without-selu';
import seluInit from './selu-init';
import seluWithBatchnorm from './selu-with-batchnorm';
import dropoutFeedsBatchnorm from './dropout-feeds-batchnorm';
import normMomentumConvention from './norm-momentum-convention';
import normChannelMismatch from './norm-channel-mismatch';
import groupnormDivisibility from './groupnorm-divisibility';
import functionalDropoutAlwaysOn from './functional-dropout-always-on';
import functionalAlphaDropoutNeverOn from './functional-alpha-dropout-never-on';
import dropRateRange from './drop-rate-range';
import rnnDropoutOneLayer from './rnn-dropout-one-layer';
import handRolledDropout from './hand-rolled-dropout';
import evalModeMissing from './eval-mode-missing';
import trainModeNotRestored from './train-mode-not-restored';
import modeSwitchNotCalled from './mode-switch-not-called';
import frozenNormStillUpdating from './frozen-norm-still-updating';
import batchnormTinyBatch from './batchnorm-tiny-batch';
import batchnormUnsyncedDdp from './batchnorm-unsynced-ddp';
import adamCoupledWeightDecay from './adam-coupled-weight-decay';
import decayOnNormAndBias from './decay-on-norm-and-bias';
import normFitBeforeSplit from './norm-fit-before-split';
import normRefitOnHoldout from './norm-refit-on-holdout';
import scaledBeforeCv from './scaled-before-cv';
import evalTransformMismatch from './eval-transform-mismatch';
import augmentOnEvalData from './augment-on-eval-data';

export const RULES: readonly Rule[] = [
  biasBeforeNorm,
  seluPlainDropout,
  alphaDropoutWithoutSelu,
  seluInit,
  seluWithBatchnorm,
  dropoutFeedsBatchnorm,
  normMomentumConvention,
  normChannelMismatch,
  groupnormDivisibility,
  functionalDropoutAlwaysOn,
  functionalAlphaDropoutNeverOn,
  dropRateRange,
  rnnDropoutOneLayer,
  handRolledDropout,
  evalModeMissing,
  trainModeNotRestored,
  modeSwitchNotCalled,
  frozenNormStillUpdating,
  batchnormTinyBatch,
  batchnormUnsyncedDdp,
  adamCoupledWeightDecay,
  decayOnNormAndBias,
  normFitBeforeSplit,
  normRefitOnHoldout,
  scaledBeforeCv,
  evalTransformMismatch,
  augmentOnEvalData,
] as unknown as readonly Rule[];

export function ruleById(id: string): Rule | undefined {
  return RULES.find((r) => r.meta.id === id);
}
