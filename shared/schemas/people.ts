import { z } from 'zod';
import { Role } from '../roles';
import { safeText } from './text';

// Requests of the People & places screen.

const id = z.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' });
const text = (max: number) => safeText({ max });

/** Names the bad entry itself, so a person finds it in a long list. */
export const EmailAddress = z
  .string({ error: 'must be text' })
  .trim()
  .max(320, { error: 'must be at most 320 characters' })
  .pipe(z.email({ error: (issue) => `"${String(issue.input)}" is not an e-mail address` }));

export const PlaceRef = z.object({ kind: z.enum(['hospital', 'agency'], { error: 'must be hospital or agency' }), id });
export type PlaceRef = z.infer<typeof PlaceRef>;

export const CreateUser = z.object({
  email: EmailAddress,
  name: text(200),
  roles: z.array(Role, { error: 'must be a list of roles' }).min(1, { error: 'must hold at least one role' }),
  memberships: z.array(PlaceRef, { error: 'must be a list' }).min(1, { error: 'must name at least one hospital or agency' }),
});
export type CreateUser = z.infer<typeof CreateUser>;

export const UpdateUser = CreateUser.partial();
export type UpdateUser = z.infer<typeof UpdateUser>;

/** A password for Plumbline's built-in sign-in; an outside identity provider keeps its own. */
export const SetPassword = z.object({
  password: z.string({ error: 'must be text' }).min(10, { error: 'must be at least 10 characters' }).max(200, { error: 'must be at most 200 characters' }),
});
export type SetPassword = z.infer<typeof SetPassword>;

// 'senior' is the second escalation step's list (the ED consultant on call, say); it came later,
// so a hospital saved without it simply has it empty.
export const NOTIFICATION_LISTS = ['full', 'limited', 'consult', 'escalation', 'senior'] as const;
export type NotificationListId = (typeof NOTIFICATION_LISTS)[number];

const addressList = () => z.array(EmailAddress, { error: 'must be a list of addresses' }).max(50, { error: 'must hold at most 50 addresses' });
export const NotificationLists = z.object({
  full: addressList(),
  limited: addressList(),
  consult: addressList(),
  escalation: addressList(),
  senior: addressList().default([]),
});
export type NotificationLists = z.infer<typeof NotificationLists>;

export const TraumaLevel = z.enum(['I', 'II', 'III', 'IV', 'none'], { error: 'must be I, II, III, IV or none' });
export const HeightUnit = z.enum(['m', 'ft', 'storeys'], { error: 'must be m, ft or storeys' });

/** An IANA time zone the runtime knows ("Europe/London"); UTC by that name too. */
export function isTimeZone(zone: string): boolean {
  return zone === 'UTC' || Intl.supportedValuesOf('timeZone').includes(zone);
}
export const TimeZone = z
  .string({ error: 'must be a time zone name' })
  .refine(isTimeZone, { error: 'must be a time zone name such as Europe/London or America/Chicago (IANA)' });

/**
 * Escalation after the first step: each step at `times` × the hospital's escalation minutes, to
 * one of its notification lists; later steps come later, each list once at most.
 */
export const EscalationLaterStep = z.object({
  times: z.number({ error: 'must be a number' }).gt(1, { error: 'must be more than 1 (the first step is 1 × the minutes)' }).max(10, { error: 'must be at most 10' }),
  list: z.enum(NOTIFICATION_LISTS, { error: `must be one of: ${NOTIFICATION_LISTS.join(', ')}` }),
});
export type EscalationLaterStep = z.infer<typeof EscalationLaterStep>;
export const EscalationLaterSteps = z
  .array(EscalationLaterStep, { error: 'must be a list of steps' })
  .max(4, { error: 'must hold at most 4 later steps' })
  .superRefine((steps, ctx) => {
    steps.forEach((step, i) => {
      if (i > 0 && step.times <= steps[i - 1].times) ctx.addIssue({ code: 'custom', path: [i, 'times'], message: 'must be later than the step before it' });
    });
  });

export const HospitalFields = z.object({
  name: text(200),
  shortName: text(40),
  traumaLevel: TraumaLevel,
  heightUnit: HeightUnit,
  escalationMinutes: z.number({ error: 'must be a number' }).int({ error: 'must be whole minutes' }).min(1, { error: 'must be at least 1' }).max(60, { error: 'must be at most 60' }),
  lists: NotificationLists,
  timeZone: TimeZone.optional(),
  escalationLaterSteps: EscalationLaterSteps.optional(),
});
export type HospitalFields = z.infer<typeof HospitalFields>;

export const UpdateHospital = HospitalFields.partial();
export type UpdateHospital = z.infer<typeof UpdateHospital>;

export const AgencyFields = z.object({ name: text(200) });
export type AgencyFields = z.infer<typeof AgencyFields>;

export const UnitFields = z.object({ callSign: text(40) });
export const UpdateUnit = z.object({ callSign: text(40).optional(), active: z.boolean({ error: 'must be true or false' }).optional() });
export type UpdateUnit = z.infer<typeof UpdateUnit>;

export const AgencyDestinations = z.object({ hospitalIds: z.array(id, { error: 'must be a list of hospital ids' }) });
export type AgencyDestinations = z.infer<typeof AgencyDestinations>;

export interface PersonRow {
  id: number;
  email: string;
  name: string;
  active: boolean;
  roles: Role[];
  memberships: Array<{ kind: 'hospital' | 'agency'; id: number; name: string }>;
}

export interface HospitalRow {
  id: number;
  name: string;
  shortName: string;
  traumaLevel: z.infer<typeof TraumaLevel>;
  heightUnit: z.infer<typeof HeightUnit>;
  escalationMinutes: number;
  lists: NotificationLists;
  /** Settings of the hospital's own, else the product-wide ones. */
  timeZone: string;
  escalationLaterSteps: EscalationLaterStep[];
}

export interface AgencyRow {
  id: number;
  name: string;
  units: Array<{ id: number; callSign: string; active: boolean }>;
  destinations: number[];
}
