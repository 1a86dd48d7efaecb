// Preload (`node --import ./test/support/node-version-as.mjs ...`): makes process.versions.node
// read TW_NODE_VERSION_AS, so the CLI's Node version check can be run for an older Node than the
// one installed. Only the version string changes; everything else is the real process.
Object.defineProperty(process.versions, 'node', {
  value: process.env.TW_NODE_VERSION_AS,
  enumerable: true,
});
