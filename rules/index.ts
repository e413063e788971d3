// The rule registry: an explicit list (not a folder scan). A parity test checks it against docs, tests and schemas.
import type { Rule } from '../server/src/engine/rule';
import biasBeforeNorm from './bias-before-norm';

export const RULES: readonly Rule[] = [
  biasBeforeNorm,
] as unknown as readonly Rule[];

export function ruleById(id: string): Rule | undefined {
  return RULES.find((r) => r.meta.id === id);
}
