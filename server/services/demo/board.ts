import { randomUUID } from 'node:crypto';
import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { BoardAction } from '../../../shared/schemas/board';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { LevelId } from '../../../shared/triage/policy';
import { LEVEL_RANK } from '../../../shared/triage/policy';
import type { Clock } from '../../deps';
import type { Mailer } from '../../mail';
import { actOnCase } from '../board/board';
import { reviseCase, submitPreAlert, type CaseActor } from '../cases/commands';
import type { DemoIds } from './ids';

// Demo cases, made through the same services a crew and a nurse use, each step at its own
// time on a clock set per case, so the audit trail, the events and the times are all real.
// Every patient, name and story here is invented.

const MIN = 60_000;
const DAY = 24 * 60 * MIN;

/** Demo pages are recorded as sent; the mail fake does not exist yet while seeding. */
const quietMailer: Mailer = { local: false, send: async () => ({ messageId: 'demo' }), close: async () => {} };

class SetClock implements Clock {
  constructor(public t: number) {}
  now() {
    return this.t;
  }
}

// A fixed seed so every first start shows the same county's history.
function random(seed: number) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

interface Story {
  clinical: ClinicalInput;
  /** A later report from the crew, if the story has one. */
  update?: (c: ClinicalInput) => ClinicalInput;
  notes?: string;
}

const ft = (feet: number) => Math.round(feet * 0.3048 * 1000) / 1000;

const STORIES: Story[] = [
  { clinical: { ageYears: 41, sex: 'male', fall: { heightM: ft(24), surface: 'concrete', firstImpact: 'back', headImpact: false }, vitals: { sbp: 86, hr: 124, rr: 26, spo2: 93, spo2RoomAir: true, gcs: { eye: 3, verbal: 4, motor: 6 } } }, notes: 'Fell from a roof edge while clearing gutters.' },
  { clinical: { ageYears: 79, sex: 'female', anticoagulant: true, fall: { heightM: 0, surface: 'tile-stone', firstImpact: 'head', headImpact: true }, vitals: { sbp: 148, hr: 82, rr: 16, spo2: 96, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } }, notes: 'Tripped in the kitchen, on a blood thinner.' },
  { clinical: { ageYears: 35, sex: 'female', fall: { heightM: ft(12), surface: 'grass', firstImpact: 'lower-limb-feet', headImpact: false }, vitals: { sbp: 118, hr: 104, rr: 20, spo2: 98, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } }, findings: ['two-proximal-long-bone-fractures'] } },
  {
    clinical: { ageYears: 67, sex: 'male', fall: { heightM: ft(9), surface: 'asphalt', firstImpact: 'side', headImpact: true }, vitals: { sbp: 128, hr: 88, rr: 18, spo2: 95, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } },
    update: (c) => ({ ...c, vitals: { ...c.vitals, sbp: 104, hr: 112, rr: 22 } }),
    notes: 'Off a ladder against the garage.',
  },
  { clinical: { ageYears: 45, sex: 'male', fall: { heightM: ft(6), surface: 'wood', firstImpact: 'upper-limb', headImpact: false }, vitals: { sbp: 136, hr: 90, rr: 16, spo2: 98, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } } },
  { clinical: { ageYears: 52, sex: 'female', fall: { heightM: ft(15), surface: 'wood', firstImpact: 'pelvis-buttocks', headImpact: false }, vitals: { sbp: 122, hr: 96, rr: 18, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } } },
  { clinical: { ageYears: 23, sex: 'male', fall: { heightM: ft(30), surface: 'earth', firstImpact: 'lower-limb-feet', headImpact: false }, vitals: { sbp: 112, hr: 118, rr: 24, spo2: 95, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } }, findings: ['pelvic-fracture'] } },
  { clinical: { ageYears: 4, sex: 'female', fall: { heightM: ft(5), surface: 'wood', firstImpact: 'head', headImpact: true }, vitals: { sbp: 96, hr: 120, rr: 26, spo2: 99, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } } },
  { clinical: { ageYears: 88, sex: 'male', fall: { heightM: 0, surface: 'stairs', firstImpact: 'face', headImpact: true }, vitals: { sbp: 102, hr: 76, rr: 18, spo2: 94, spo2RoomAir: true, gcs: { eye: 4, verbal: 4, motor: 6 } } } },
  {
    clinical: { ageYears: 31, sex: 'male', fall: { heightM: ft(40), surface: 'concrete', firstImpact: 'chest', headImpact: true }, vitals: { sbp: 94, hr: 128, rr: 30, spo2: 88, spo2RoomAir: true, gcs: { eye: 2, verbal: 3, motor: 5 } }, findings: ['chest-wall-instability'] },
    update: (c) => ({ ...c, vitals: { ...c.vitals, sbp: 78, hr: 136, gcs: { eye: 1, verbal: 2, motor: 4 } } }),
  },
  { clinical: { ageYears: 60, sex: 'female', fall: { heightM: ft(8), surface: 'concrete', firstImpact: 'back', headImpact: false }, vitals: { sbp: 132, hr: 84, rr: 16, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } }, findings: ['spinal-injury-deficit'] } },
  { clinical: { ageYears: 29, sex: 'female', pregnancyWeeks: 26, fall: { heightM: 0, surface: 'stairs', firstImpact: 'abdomen', headImpact: false }, vitals: { sbp: 116, hr: 98, rr: 18, spo2: 99, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } } },
  { clinical: { ageYears: 71, sex: 'female', fall: { heightM: ft(11), surface: 'grass', firstImpact: 'side', headImpact: false }, vitals: { sbp: 142, hr: 80, rr: 16, spo2: 96, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } } },
  { clinical: { ageYears: 38, sex: 'male', fall: { heightM: ft(18), surface: 'vehicle', firstImpact: 'chest', headImpact: false }, vitals: { sbp: 108, hr: 112, rr: 28, spo2: 92, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } } },
];

const BELOW_REASONS = [
  'Crew reports the patient walking at scene; vitals settled on the second set.',
  'Discussed with the trauma surgeon on call: surgical review on arrival instead.',
  'Fall height estimated generously by a bystander; no injury found on the crew’s survey.',
  'Resus bays full with two full activations; senior ED doctor to assess first.',
];
const ABOVE_REASONS = ['Crew worried: pale and clammy despite the numbers.', 'Mechanism and age together: lower threshold tonight.'];
const BAYS = ['Resus 1', 'Resus 2', 'Resus 3', 'Majors 4'];

interface Actors { crew: CaseActor; nurses: Record<number, CaseActor> }

async function actorsOf(db: Knex, ids: DemoIds): Promise<Actors> {
  const agency = await db('agencies').where({ id: ids.agency }).first('name');
  const user = async (email: string) => db('users').where({ email }).first('id', 'email', 'name');
  const crewUser = await user('paramedic@plumbline.test');
  const crewMe: Me = { user: crewUser, roles: ['paramedic'], memberships: [{ kind: 'agency', id: ids.agency, name: agency.name }] };
  const hospitalMe = async (email: string, hospitalId: number): Promise<CaseActor> => {
    const h = await db('hospitals').where({ id: hospitalId }).first('name');
    return { me: { user: await user(email), roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: hospitalId, name: h.name }] }, role: 'charge_nurse' };
  };
  return {
    crew: { me: crewMe, role: 'paramedic' },
    nurses: {
      [ids.hospitals.general]: await hospitalMe('nurse@plumbline.test', ids.hospitals.general),
      [ids.hospitals.community]: await hospitalMe(FENMOOR_NURSE.email, ids.hospitals.community),
    },
  };
}

/** A charge nurse at the community hospital, so its board and its past cases have someone real behind them. */
/** The demo account (in seed.ts) that decides for Fenmoor Community's cases. */
const FENMOOR_NURSE = { email: 'fenmoor.nurse@plumbline.test' };

interface Script {
  hospitalId: number;
  unitId: number;
  story: Story;
  start: number;
  etaMinutes: number;
  /** Steps after the pre-alert, in minutes from it; stop where a live case stands now. */
  steps: Array<{ after: number; action: BoardAction | 'update'; body?: Record<string, unknown> }>;
}

async function play(db: Knex, actors: Actors, script: Script): Promise<number> {
  const clock = new SetClock(script.start);
  const nurse = actors.nurses[script.hospitalId];
  const { caseId } = await submitPreAlert(db, clock, actors.crew, {
    clientId: randomUUID(),
    hospitalId: script.hospitalId,
    unitId: script.unitId,
    etaMinutes: script.etaMinutes,
    notes: script.story.notes,
    clinical: script.story.clinical,
  });
  for (const step of script.steps) {
    clock.t = script.start + Math.round(step.after * MIN);
    if (step.action === 'update') {
      await reviseCase(db, clock, actors.crew, { caseId, clinical: script.story.update!(script.story.clinical) });
      continue;
    }
    const { row_version: rowVersion, acknowledged_at, level_rose } = await db('cases').where({ id: caseId }).first('row_version', 'acknowledged_at', 'level_rose');
    // A second acknowledgement only when the update raised the level; otherwise there is nothing new to see.
    if (step.action === 'acknowledge' && acknowledged_at != null && !level_rose) continue;
    const body: Record<string, unknown> = { rowVersion, ...step.body };
    // Recorded times (arrival, bedside) are given as minutes from the pre-alert too.
    if (typeof body.at === 'number') body.at = script.start + Math.round(body.at * MIN);
    await actOnCase({ db, clock, mailer: quietMailer }, nurse, caseId, step.action, body);
  }
  return caseId;
}

async function recommendedLevel(db: Knex, caseId: number): Promise<LevelId> {
  return (await db('cases').where({ id: caseId }).first('recommended_level')).recommended_level;
}

/**
 * About forty closed cases over the last five months at both hospitals (some decided below
 * the recommendation with a reason, a few with the team leader late to the bedside), then the
 * live inbound cases at Alderwick General that a nurse signing in finds on the board.
 */
export async function seedBoardDemo(db: Knex, ids: DemoIds, clock: Clock): Promise<void> {
  const now = clock.now();
  const actors = await actorsOf(db, ids);
  const rnd = random(20261201);
  const pick = <T>(list: readonly T[]) => list[Math.floor(rnd() * list.length)];
  const between = (lo: number, hi: number) => lo + rnd() * (hi - lo);

  for (let i = 0; i < 40; i++) {
    const hospitalId = rnd() < 0.7 ? ids.hospitals.general : ids.hospitals.community;
    const story = pick(STORIES);
    // Spread over 150 days to a week ago, at any hour: falls do not keep office hours.
    const start = Math.round(now - between(7, 150) * DAY);
    const etaMinutes = Math.round(between(8, 26));
    const ack = between(0.3, 1.6) + (rnd() < 0.15 ? between(1.5, 4) : 0);
    const steps: Script['steps'] = [{ after: ack, action: 'acknowledge' }];
    let t = ack;
    if (story.update) {
      t += between(2, 5);
      steps.push({ after: t, action: 'update' });
      t += between(0.3, 1);
      steps.push({ after: t, action: 'acknowledge' });
    }
    const id = await play(db, actors, { hospitalId, unitId: pick(ids.units), story, start, etaMinutes, steps });
    const recommended = await recommendedLevel(db, id);
    const rank = LEVEL_RANK[recommended];
    const roll = rnd();
    let level: LevelId = recommended;
    let reason: string | undefined;
    if (roll < 0.14 && rank > 0) {
      level = (['none', 'consult', 'limited'] as const)[rank - 1];
      reason = pick(BELOW_REASONS);
    } else if (roll < 0.24 && rank < 3) {
      level = (['consult', 'limited', 'full'] as const)[rank];
      reason = pick(ABOVE_REASONS);
    }
    const rest: Script['steps'] = [];
    t += between(0.5, 2);
    rest.push({ after: t, action: 'decide', body: { level, reason } });
    t += between(0.3, 1.5);
    rest.push({ after: t, action: 'bay', body: { bay: pick(BAYS) } });
    if (level !== 'none') rest.push({ after: (t += between(0.2, 1)), action: 'page' });
    const arrived = Math.max(t + 1, etaMinutes + between(-2, 3));
    rest.push({ after: arrived + 0.1, action: 'arrived', body: { at: arrived } });
    if (level === 'full' || level === 'limited') {
      // Most within the 15-minute target [source: Ingraham A et al.], a few well over it.
      const bedside = arrived + (rnd() < 0.2 ? between(16, 28) : between(2, 13));
      rest.push({ after: bedside + 0.5, action: 'team-at-bedside', body: { at: bedside } });
    }
    rest.push({ after: arrived + between(60, 240), action: 'close' });
    await continueCase(db, actors, id, hospitalId, start, rest);
  }

  // Live at Alderwick General: what the nurse walks up to at the start of a shift.
  const general = ids.hospitals.general;
  const [medic11, medic12, medic14, medic21, rescue3] = ids.units;
  const live: Script[] = [
    // New and not yet acknowledged: the top of the board, with the mark on.
    { hospitalId: general, unitId: medic11, story: STORIES[0], start: now - 0.8 * MIN, etaMinutes: 7, steps: [] },
    // Waiting four minutes for an acknowledgement: the server marks it overdue on its first look.
    { hospitalId: general, unitId: medic14, story: STORIES[1], start: now - 4 * MIN, etaMinutes: 15, steps: [] },
    // Acknowledged, level decided, bay assigned and team paged: the crew knows where to go.
    {
      hospitalId: general, unitId: medic12, story: STORIES[2], start: now - 9 * MIN, etaMinutes: 12,
      steps: [{ after: 0.7, action: 'acknowledge' }, { after: 1.5, action: 'decide', body: { level: 'limited' } }, { after: 2, action: 'bay', body: { bay: 'Resus 2' } }, { after: 2.4, action: 'page' }],
    },
    // Acknowledged at one level, then the crew's second set of vitals raised the recommendation.
    {
      hospitalId: general, unitId: medic21, story: STORIES[3], start: now - 11 * MIN, etaMinutes: 16,
      steps: [{ after: 0.6, action: 'acknowledge' }, { after: 1.4, action: 'decide', body: { level: 'consult' } }, { after: 9.5, action: 'update' }],
    },
    // No criteria met: acknowledged and decided, no team.
    {
      hospitalId: general, unitId: rescue3, story: STORIES[4], start: now - 6 * MIN, etaMinutes: 22,
      steps: [{ after: 0.5, action: 'acknowledge' }, { after: 1, action: 'decide', body: { level: 'none' } }],
    },
    // In the department: arrived four minutes ago, the team leader not yet at the bedside.
    {
      hospitalId: general, unitId: medic11, story: STORIES[5], start: now - 19 * MIN, etaMinutes: 14,
      steps: [{ after: 0.4, action: 'acknowledge' }, { after: 1.2, action: 'decide', body: { level: 'consult' } }, { after: 1.6, action: 'bay', body: { bay: 'Resus 1' } }, { after: 2, action: 'page' }, { after: 15, action: 'arrived' }],
    },
  ];
  for (const script of live) await play(db, actors, script);
  // One on its way to Fenmoor Community, so that board has something too.
  await play(db, actors, { hospitalId: ids.hospitals.community, unitId: medic12, story: STORIES[12], start: now - 2.5 * MIN, etaMinutes: 11, steps: [{ after: 1, action: 'acknowledge' }] });
}

async function continueCase(db: Knex, actors: Actors, caseId: number, hospitalId: number, start: number, steps: Script['steps']): Promise<void> {
  const clock = new SetClock(start);
  for (const step of steps) {
    clock.t = start + Math.round(step.after * MIN);
    const { row_version: rowVersion } = await db('cases').where({ id: caseId }).first('row_version');
    const body: Record<string, unknown> = { rowVersion, ...step.body };
    if (typeof body.at === 'number') body.at = start + Math.round(body.at * MIN);
    await actOnCase({ db, clock, mailer: quietMailer }, actors.nurses[hospitalId], caseId, step.action as BoardAction, body);
  }
}
