#!/usr/bin/env node
// Entry point for `npx regwise`: runs the bundled CLI (build first with `npm run build`).
'use strict';
const path = require('node:path');
const fs = require('node:fs');
const cli = path.join(__dirname, '..', 'dist', 'cli.js');
if (!fs.existsSync(cli)) {
  process.stderr.write('regwise: dist/cli.js is missing; run `npm run build` first\n');
  process.exit(2);
}
require(cli).main(process.argv.slice(2)).then((code) => { process.exitCode = code; });
