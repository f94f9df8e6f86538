/** Small dense linear algebra on row-major Float64Arrays. */
export * from './dense.js';
