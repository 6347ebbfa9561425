import type { Policy } from '../triage/policy';

/** A hospital the crew's agency takes patients to, with the policy its live result is computed under. */
export interface CrewDestination {
  id: number;
  name: string;
  shortName: string;
  traumaLevel: string;
  heightUnit: 'm' | 'ft' | 'storeys';
  agencyIds: number[];
  /** The policy in force there now, so the form's result matches the server's evaluation. */
  policy: Policy;
}

export interface CrewUnit {
  id: number;
  callSign: string;
  agencyId: number;
}

/** What the New pre-alert form offers: the agency's destinations and its active units. */
export interface CrewDestinations {
  agencies: Array<{ id: number; name: string }>;
  hospitals: CrewDestination[];
  units: CrewUnit[];
}
