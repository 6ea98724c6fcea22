/**
 * The public API of the statistics engine: every module's exports, and ENGINE_VERSION.
 * Pure TypeScript with no I/O, shared by the CLI, the server and the tests.
 */
export * from './acceleration';
export * from './allowable';
export * from './analysis';
export * from './bias';
export * from './blandAltman';
export * from './bootstrap';
export * from './cautions';
export * from './csvInput';
export * from './deming';
export * from './diagnostics';
export * from './distributions';
export * from './errors';
export * from './esd';
export * from './lad';
export * from './linear';
export * from './lineBias';
export * from './mEstimator';
export * from './mm';
export * from './norms';
export * from './ols';
export * from './passingBablok';
export * from './random';
export * from './sEstimator';
export * from './types';
export * from './validate';
