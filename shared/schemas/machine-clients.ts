import { z } from 'zod';

/** An administrator registers a record or dispatch system to send pre-alerts for one of their agencies. */
export const RegisterMachineClient = z.object({
  name: z.string({ error: 'must be text' }).trim().min(3, { error: 'needs at least 3 characters' }).max(120, { error: 'must be at most 120 characters' }),
  agencyId: z.number({ error: "must be the agency's number" }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }),
  requestsPerMinute: z.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).min(1, { error: 'must be at least 1' }).max(600, { error: 'must be at most 600' }).default(60),
});
export type RegisterMachineClient = z.infer<typeof RegisterMachineClient>;

export const MachineClientView = z.object({
  id: z.number().int(),
  clientId: z.string(),
  name: z.string(),
  agency: z.object({ id: z.number().int(), name: z.string() }),
  requestsPerMinute: z.number().int(),
  active: z.boolean(),
  createdAt: z.number(),
  revokedAt: z.number().nullable(),
});
export type MachineClientView = z.infer<typeof MachineClientView>;

/** Answered once, at registration: the secret is never shown again. */
export const IssuedMachineClient = z.object({ client: MachineClientView, clientSecret: z.string(), tokenEndpoint: z.string() });
export type IssuedMachineClient = z.infer<typeof IssuedMachineClient>;
