// Preload for a child process: makes the optional peer ioredis unresolvable, as in an app that did
// not install it (used by lifecycle.test.ts).
const Module = require('node:module');
const original = Module._resolveFilename;
Module._resolveFilename = function (request, ...rest) {
  if (request === 'ioredis' || request.startsWith('ioredis/')) {
    const err = new Error(`Cannot find module '${request}'`);
    err.code = 'MODULE_NOT_FOUND';
    throw err;
  }
  return original.call(this, request, ...rest);
};
