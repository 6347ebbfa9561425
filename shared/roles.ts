import { z } from 'zod';

export const Role = z.enum(['paramedic', 'charge_nurse', 'trauma_lead', 'quality', 'admin']);
export type Role = z.infer<typeof Role>;

export const roleLabels: Record<Role, string> = {
  paramedic: 'Paramedic',
  charge_nurse: 'Charge nurse',
  trauma_lead: 'Trauma lead',
  quality: 'Quality team',
  admin: 'Administrator',
};

export const Membership = z.object({
  kind: z.enum(['hospital', 'agency']),
  id: z.number().int(),
  name: z.string(),
});
export type Membership = z.infer<typeof Membership>;

export const Me = z.object({
  user: z.object({ id: z.number().int(), email: z.string(), name: z.string() }),
  roles: z.array(Role),
  memberships: z.array(Membership),
});
export type Me = z.infer<typeof Me>;
