import type { FormValues } from './hooks/use-calc-form.ts';

/**
 * Pre-filled inputs: plausible values of an invented plant (influent 1 500 m³/h, RAS 900 m³/h,
 * MLSS 3.2 g/L, SVI 120 mL/g, aeration 12 000 m³, two clarifiers of 700 m², 4 m deep). They
 * are examples to edit, not plant data; "Fill from live plant" (../api/live-prefill.ts) takes
 * the plant's flows, concentrations, masses and geometry from its latest balance.
 */
export const EXAMPLE_INPUTS = {
  storm: {
    influentFlow_m3h: '1500',
    rasFlow_m3h: '900',
    mlss_gL: '3.2',
    svi_mLg: '120',
    aerationVolume_m3: '12000',
    clarifierArea_m2: '1400',
    stormFlow_m3h: '3000',
    xrFactor: '1200',
    clarifierMass_kg: '',
  },
  statePoint: {
    influentFlow_m3h: '1500',
    rasFlow_m3h: '900',
    wasFlow_m3h: '20',
    mlss_gL: '3.2',
    clarifierArea_m2: '1400',
    settling: { svi_mLg: '120', correlation: 'haertel-poepel-1992', v0_mh: '9.5', k_Lg: '0.49' },
  },
  settler: {
    feedFlow_m3h: '2400',
    feedTss_gL: '3.2',
    underflowFlow_m3h: '920',
    area_m2: '1400',
    depth_m: '4',
    layers: '10',
    feedLayer: '5',
  },
  srt: {
    aerationMass_kg: '38400',
    clarifierMass_kg: '6000',
    wasFlow_m3h: '20',
    wasTss_gL: '8.5',
    effluentFlow_m3h: '1480',
    effluentTss_gL: '0.010',
    targetSrt_d: '10',
  },
  svi: {
    settledVolume_mLL: '192',
    mlss_gL: '3.2',
    dilutionFactor: '2',
    kind: '',
  },
} satisfies Record<string, FormValues>;
