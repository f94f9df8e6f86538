/** The ErrorValue schema (main/services/serviceError.ts) for checks at process lines. No Node imports. */
import { z } from 'zod';

export const ERROR_KINDS = ['file', 'data', 'spec', 'usage', 'cancelled', 'worker', 'numeric', 'internal'] as const;
export const ErrorValueSchema = z.strictObject({
  kind: z.enum(ERROR_KINDS),
  message: z.string().max(100_000),
  problems: z.array(z.string().max(10_000)).max(100_000),
});

/** A usage ErrorValue for a request that failed its schema: the first problems with their paths. */
export function usageErrorFromZod(what: string, error: z.ZodError): { kind: 'usage'; message: string; problems: string[] } {
  const problems = error.issues.slice(0, 20).map((i) => `${i.path.length ? i.path.map(String).join('.') : '(payload)'}: ${i.message}`);
  return { kind: 'usage', message: `${what}: the request is malformed (${problems[0] ?? 'invalid'})`, problems };
}
