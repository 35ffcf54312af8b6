#!/usr/bin/env node
import('../dist/cli/main.js').then((cli) => cli.main(process.argv.slice(2)));
