/** The sparsewire wire protocol, version 1: message schemas, codec, binary helpers and limits. */
export * from './limits.js';
export * from './errors.js';
export * from './names.js';
export * from './bin.js';
export * from './declaration.js';
export * from './messages.js';
export { encode, encodeTrusted, decode } from './codec.js';
