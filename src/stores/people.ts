import { defineStore } from 'pinia';
import { ref } from 'vue';
import * as api from '@/api/people';
import type { AgencyRow, HospitalRow, PersonRow } from '@/api/people';
import type { AgencyFields, CreateUser, HospitalFields, UpdateHospital, UpdateUnit, UpdateUser } from '@shared/schemas/people';

export const usePeopleStore = defineStore('people', () => {
  const people = ref<PersonRow[]>([]);
  const hospitals = ref<HospitalRow[]>([]);
  const agencies = ref<AgencyRow[]>([]);
  const allHospitals = ref<Array<{ id: number; name: string }>>([]);
  const loaded = ref(false);

  async function load(): Promise<void> {
    const [p, h, a] = await Promise.all([api.listPeople(), api.listHospitals(), api.listAgencies()]);
    people.value = p;
    hospitals.value = h;
    agencies.value = a.agencies;
    allHospitals.value = a.hospitals;
    loaded.value = true;
  }

  const put = <T extends { id: number }>(list: T[], row: T) => {
    const i = list.findIndex((x) => x.id === row.id);
    if (i >= 0) list.splice(i, 1, row);
    else list.push(row);
    return row;
  };

  const addPerson = async (request: CreateUser) => put(people.value, await api.createPerson(request));
  const editPerson = async (id: number, request: UpdateUser) => put(people.value, await api.updatePerson(id, request));
  const setPassword = async (id: number, password: string) => put(people.value, await api.setPassword(id, password));
  const setActive = async (id: number, active: boolean) => put(people.value, await api.setPersonActive(id, active));
  async function addHospital(fields: HospitalFields) {
    const row = put(hospitals.value, await api.createHospital(fields));
    allHospitals.value = [...allHospitals.value, { id: row.id, name: row.name }];
    return row;
  }
  const editHospital = async (id: number, fields: UpdateHospital) => put(hospitals.value, await api.updateHospital(id, fields));
  const addAgency = async (fields: AgencyFields) => put(agencies.value, await api.createAgency(fields));
  const editAgency = async (id: number, fields: AgencyFields) => put(agencies.value, await api.updateAgency(id, fields));
  const addUnit = async (agencyId: number, callSign: string) => put(agencies.value, await api.addUnit(agencyId, callSign));
  const editUnit = async (unitId: number, fields: UpdateUnit) => put(agencies.value, await api.updateUnit(unitId, fields));
  const setDestinations = async (agencyId: number, hospitalIds: number[]) => put(agencies.value, await api.setDestinations(agencyId, hospitalIds));

  return { people, hospitals, agencies, allHospitals, loaded, load, addPerson, editPerson, setPassword, setActive, addHospital, editHospital, addAgency, editAgency, addUnit, editUnit, setDestinations };
});
