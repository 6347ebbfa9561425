// The engine benchmarks' traffic: a fixed, varied mix of clinical inputs from a seeded generator,
// so every run measures the same inputs. Used by tests/bench/engine.ts and by the load run's
// evaluate figure (evaluate-rate.ts).
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { CONSIDERATIONS, FINDINGS, SURFACES } from '../../../shared/schemas/clinical-options';

export interface EngineTraffic {
  lowFall(): ClinicalInput;
  fromHeight(): ClinicalInput;
  severe(): ClinicalInput;
  /** 60 % low falls, 25 % falls from height, 15 % severely injured. */
  mixed(): ClinicalInput;
}

export function engineTraffic(start = 20240601): EngineTraffic {
  let seed = start;
  const random = () => ((seed = (seed * 1103515245 + 12345) >>> 0) / 2 ** 32);
  const pick = <T>(list: readonly T[]): T => list[Math.floor(random() * list.length)];
  const maybe = <T>(value: T, p = 0.8): T | null => (random() < p ? value : null);

  const between = (lo: number, hi: number) => lo + Math.floor(random() * (hi - lo + 1));

  // A mix shaped like a fall service's traffic [ours]: most pre-alerts are low falls with vitals in
  // range, some are falls from height with vitals still to come, a few are severely injured.
  function lowFall(): ClinicalInput {
    return {
      ageYears: random() < 0.6 ? between(65, 98) : random() < 0.1 ? between(0, 23) / 12 : between(1, 64),
      sex: pick(['female', 'male'] as const),
      pregnancyWeeks: null,
      anticoagulant: random() < 0.3,
      fall: { heightM: random() < 0.7 ? 0 : between(1, 30) / 10, surface: pick(SURFACES), headImpact: random() < 0.4 },
      vitals: {
        sbp: between(110, 170), hr: between(60, 100), rr: between(12, 22), spo2: between(93, 100), spo2RoomAir: true,
        gcs: { eye: 4, verbal: random() < 0.8 ? 5 : 4, motor: 6 },
        intubated: false, respiratorySupport: false, respiratoryDistress: false,
      },
      findings: [],
      considerations: random() < 0.05 ? ['ems-concern'] : [],
    };
  }

  function fromHeight(): ClinicalInput {
    const known = <T>(value: T): T | null => maybe(value, 0.6);
    return {
      ageYears: between(16, 80),
      sex: pick(['female', 'male', 'unknown'] as const),
      anticoagulant: known(false),
      fall: { heightM: between(30, 150) / 10, surface: pick(SURFACES), firstImpact: 'lower-limb-feet', headImpact: known(false) },
      vitals: {
        sbp: known(between(95, 160)), hr: known(between(60, 110)), rr: known(between(12, 26)), spo2: known(between(92, 100)),
        spo2RoomAir: known(true), gcsTotal: known(15), intubated: false, respiratorySupport: false, respiratoryDistress: known(false),
      },
      findings: random() < 0.3 ? [pick(FINDINGS)] : [],
    };
  }

  function severe(): ClinicalInput {
    return {
      ageYears: between(5, 90),
      sex: pick(['female', 'male'] as const),
      pregnancyWeeks: null,
      anticoagulant: maybe(random() < 0.3),
      weightKg: between(20, 110),
      fall: { heightM: between(0, 250) / 10, surface: pick(SURFACES), headImpact: maybe(random() < 0.6) },
      vitals: {
        sbp: maybe(between(60, 130)), hr: maybe(between(70, 150)), rr: maybe(between(6, 36)), spo2: maybe(between(80, 99)),
        spo2RoomAir: maybe(random() < 0.7),
        gcs: { eye: between(1, 4), verbal: between(1, 5), motor: between(1, 6) },
        intubated: maybe(random() < 0.1), respiratorySupport: maybe(random() < 0.2), respiratoryDistress: maybe(random() < 0.3),
      },
      findings: random() < 0.6 ? [pick(FINDINGS), pick(FINDINGS)] : [],
      considerations: random() < 0.2 ? [pick(CONSIDERATIONS)] : [],
    };
  }

  const mixed = (): ClinicalInput => {
    const r = random();
    return r < 0.6 ? lowFall() : r < 0.85 ? fromHeight() : severe();
  };

  return { lowFall, fromHeight, severe, mixed };
}
