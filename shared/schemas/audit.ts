import { z } from 'zod';

/** Where a hospital's audit checkpoints are mailed: its trauma programme's address. */
export const ProgrammeEmail = z.object({
  hospitalId: z.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }),
  email: z.email({ error: 'must be an e-mail address' }).max(254, { error: 'must be at most 254 characters' }).nullable(),
});
export type ProgrammeEmail = z.infer<typeof ProgrammeEmail>;
