/** A dataset that crossed a process line or was read from a project file, rebuilt and re-validated by createDataset. */
import { createDataset, type SubjectInput } from '../../engine/data/dataset.js';
import type { Dataset } from '../../engine/data/types.js';
import { ServiceError } from './serviceError.js';

export function datasetFromWire(d: unknown): Dataset {
  if (typeof d !== 'object' || d === null || !Array.isArray((d as Dataset).subjects) || !Array.isArray((d as Dataset).covariateNames))
    throw new ServiceError('data', 'the dataset is malformed: it needs "subjects" and "covariateNames" lists');
  const { subjects, covariateNames } = d as { subjects: Record<string, unknown>[]; covariateNames: string[] };
  const inputs = subjects.map((s) => {
    const cov = Object.create(null) as Record<string, string | number>;
    if (typeof s.covariates === 'object' && s.covariates !== null) for (const [k, v] of Object.entries(s.covariates)) cov[k] = v as string | number;
    return { id: s.id, covariates: cov, doses: s.doses, observations: s.observations } as SubjectInput;
  });
  return createDataset(inputs, covariateNames);
}
