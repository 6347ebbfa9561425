import { z } from 'zod';

// A hospital's bays, in the order the board offers them.
const bayName = z.string({ error: 'must be text' }).trim().min(1, { error: 'must name the bay' }).max(40, { error: 'must be at most 40 characters' });

export const HospitalBays = z.object({
  bays: z
    .array(bayName, { error: 'must be a list of bay names' })
    .max(60, { error: 'must hold at most 60 bays' })
    .refine((list) => new Set(list.map((b) => b.toLowerCase())).size === list.length, { error: 'must not name a bay twice' }),
});
export type HospitalBays = z.infer<typeof HospitalBays>;

/** A bay and the open case in it, if any. */
export interface BayView {
  name: string;
  occupiedBy: Array<{ caseId: number; caseNumber: string }>;
}
