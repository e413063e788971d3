// The rule registry: an explicit list (not a folder scan). A parity test checks it against docs, tests and schemas.
import type { Rule } from '../server/src/engine/rule';
import biasBeforeNorm from './bias-before-norm';
import functionalDropoutAlwaysOn from './functional-dropout-always-on';
import functionalAlphaDropoutNeverOn from './functional-alpha-dropout-never-on';

export const RULES: readonly Rule[] = [
  biasBeforeNorm,
  functionalDropoutAlwaysOn,
  functionalAlphaDropoutNeverOn,
] as unknown as readonly Rule[];

export function ruleById(id: string): Rule | undefined {
  return RULES.find((r) => r.meta.id === id);
}
