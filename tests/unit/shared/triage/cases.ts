import type { ClinicalInput } from '../../../../shared/schemas/clinical';

// A patient with every input recorded and in range, so a test changes one value and sees one criterion.
export function patient(overrides: Partial<ClinicalInput> & { vitals?: Partial<NonNullable<ClinicalInput['vitals']>> } = {}): ClinicalInput {
  const { vitals, fall, ...rest } = overrides;
  return {
    ageYears: 40,
    sex: 'male',
    pregnancyWeeks: null,
    anticoagulant: false,
    findings: [],
    considerations: [],
    ...rest,
    fall: { heightM: 1, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false, ...fall },
    vitals: {
      sbp: 130, hr: 80, rr: 16, spo2: 98, spo2RoomAir: true,
      gcs: { eye: 4, verbal: 5, motor: 6 },
      intubated: false, respiratorySupport: false, respiratoryDistress: false,
      ...vitals,
    },
  };
}
