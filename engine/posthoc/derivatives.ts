/** The finite differences live in engine/optim (shared with dosing's minimiser). */
export { centralGradient, centralHessian, type Objective } from '../optim/finiteDifferences.js';
