// Ids are the input contract (SOURCES.md §2, §10); labels are the plain words the form and board show.

export interface Option<Id extends string> {
  readonly id: Id;
  readonly label: string;
}

export const HEIGHT_UNITS = ['m', 'ft', 'storeys'] as const;
export type HeightUnit = (typeof HEIGHT_UNITS)[number];

export const SEXES = ['female', 'male', 'other', 'unknown'] as const;
export type Sex = (typeof SEXES)[number];

export const SURFACES = [
  'concrete', 'asphalt', 'tile-stone', 'wood', 'earth', 'grass', 'sand',
  'snow', 'water', 'vehicle', 'stairs', 'other', 'unknown',
] as const;
export type Surface = (typeof SURFACES)[number];

export const FIRST_IMPACT_REGIONS = [
  'head', 'face', 'neck', 'chest', 'back', 'abdomen', 'pelvis-buttocks',
  'upper-limb', 'lower-limb-feet', 'side', 'unknown',
] as const;
export type FirstImpactRegion = (typeof FIRST_IMPACT_REGIONS)[number];

export const FINDINGS = [
  'penetrating-head-neck-torso-proximal-limb', 'skull-deformity', 'spinal-injury-deficit',
  'chest-wall-instability', 'pelvic-fracture', 'two-proximal-long-bone-fractures',
  'mangled-extremity', 'amputation-proximal', 'bleeding-tourniquet-packing',
] as const;
export type Finding = (typeof FINDINGS)[number];

export const CONSIDERATIONS = [
  'suspected-abuse', 'high-resource-needs', 'burns', 'receiving-blood', 'ems-concern',
] as const;
export type Consideration = (typeof CONSIDERATIONS)[number];

export const sexOptions: readonly Option<Sex>[] = [
  { id: 'female', label: 'Female' },
  { id: 'male', label: 'Male' },
  { id: 'other', label: 'Other' },
  { id: 'unknown', label: 'Not known' },
];

export const surfaceOptions: readonly Option<Surface>[] = [
  { id: 'concrete', label: 'Concrete' },
  { id: 'asphalt', label: 'Asphalt or tarmac' },
  { id: 'tile-stone', label: 'Tiles or stone' },
  { id: 'wood', label: 'Wooden floor or decking' },
  { id: 'earth', label: 'Bare earth' },
  { id: 'grass', label: 'Grass' },
  { id: 'sand', label: 'Sand' },
  { id: 'snow', label: 'Snow' },
  { id: 'water', label: 'Water' },
  { id: 'vehicle', label: 'Onto a vehicle' },
  { id: 'stairs', label: 'Down stairs' },
  { id: 'other', label: 'Something else' },
  { id: 'unknown', label: 'Not known' },
];

export const firstImpactOptions: readonly Option<FirstImpactRegion>[] = [
  { id: 'head', label: 'Head' },
  { id: 'face', label: 'Face' },
  { id: 'neck', label: 'Neck' },
  { id: 'chest', label: 'Chest' },
  { id: 'back', label: 'Back' },
  { id: 'abdomen', label: 'Belly' },
  { id: 'pelvis-buttocks', label: 'Hips or buttocks' },
  { id: 'upper-limb', label: 'Arm or hand' },
  { id: 'lower-limb-feet', label: 'Legs or feet' },
  { id: 'side', label: 'Side of the body' },
  { id: 'unknown', label: 'Not known' },
];

export const findingOptions: readonly Option<Finding>[] = [
  { id: 'penetrating-head-neck-torso-proximal-limb', label: 'Penetrating wound to head, neck, torso or upper arm or thigh' },
  { id: 'skull-deformity', label: 'Skull deformity or suspected fracture' },
  { id: 'spinal-injury-deficit', label: 'Suspected spinal injury with new weakness or numbness' },
  { id: 'chest-wall-instability', label: 'Unstable or deformed chest wall' },
  { id: 'pelvic-fracture', label: 'Suspected broken pelvis' },
  { id: 'two-proximal-long-bone-fractures', label: 'Two or more broken upper arm or thigh bones' },
  { id: 'mangled-extremity', label: 'Crushed, degloved, mangled or pulseless limb' },
  { id: 'amputation-proximal', label: 'Amputation above the wrist or ankle' },
  { id: 'bleeding-tourniquet-packing', label: 'Bleeding that needs a tourniquet or wound packing' },
];

export const considerationOptions: readonly Option<Consideration>[] = [
  { id: 'suspected-abuse', label: 'Abuse suspected' },
  { id: 'high-resource-needs', label: 'Special, high-resource care needs' },
  { id: 'burns', label: 'Burns as well as the injury' },
  { id: 'receiving-blood', label: 'Receiving blood to keep vital signs up' },
  { id: 'ems-concern', label: 'Crew is worried' },
];

// What the crew has already done, in the order a pre-alert usually says it (mechanism,
// injuries, signs, treatment: common practice in ambulance pre-alerts, no source).
export const TREATMENTS = ['tourniquet', 'pelvic-binder', 'splint', 'airway', 'oxygen', 'fluids-blood', 'analgesia'] as const;
export type Treatment = (typeof TREATMENTS)[number];

export const treatmentOptions: readonly Option<Treatment>[] = [
  { id: 'tourniquet', label: 'Tourniquet' },
  { id: 'pelvic-binder', label: 'Pelvic binder' },
  { id: 'splint', label: 'Splint' },
  { id: 'airway', label: 'Airway management' },
  { id: 'oxygen', label: 'Oxygen' },
  { id: 'fluids-blood', label: 'Fluids or blood' },
  { id: 'analgesia', label: 'Pain relief' },
];
