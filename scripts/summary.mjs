// Prints the closing line of a full test run: vitest's counts (from its JSON report) plus the editor end-to-end run.
import * as fs from 'node:fs';

const report = JSON.parse(fs.readFileSync('test-artifacts/vitest.json', 'utf8'));
let passed = report.numPassedTests;
let failed = report.numFailedTests;
const skipped = report.numPendingTests + report.numTodoTests;
const e2e = process.argv[2];
if (e2e === 'e2e-passed') passed += 1;
else if (e2e === 'e2e-failed') failed += 1;
console.log(`\nvitest: ${report.numPassedTests} passed, ${report.numFailedTests} failed, ${skipped} skipped; editor end-to-end: ${e2e ?? 'not run'}`);
console.log(`Tests: ${passed} passed, ${failed} failed${skipped ? `, ${skipped} skipped` : ''}`);
process.exit(failed ? 1 : 0);
