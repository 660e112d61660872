// Perceptually uniform, colour-vision-deficiency-friendly colour maps as 256-entry sRGB lookup tables.
//
// viridis: van der Walt & Smith for matplotlib (data released CC0).
// cividis: Nuñez, Anderton & Renslow (PLOS ONE 13(8), 2018), as distributed with matplotlib.
// Both rise monotonically in CIE L*, so the map still reads correctly in grey-scale print;
// test/report/colourmaps.test.ts checks that.

import type { Plane } from '../types.js';

export interface ColourMap {
  name: 'viridis' | 'cividis';
  /** 256 entries x (R, G, B), 8-bit sRGB, index 0 = low end */
  lut: Uint8Array;
}

function unpack(hex: string): Uint8Array {
  if (hex.length !== 256 * 6) throw new Error('colour table must hold 256 entries');
  const lut = new Uint8Array(768);
  for (let i = 0; i < 768; i++) lut[i] = parseInt(hex.slice(i * 2, i * 2 + 2), 16);
  return lut;
}

export const VIRIDIS: ColourMap = {
  name: 'viridis',
  lut: unpack(
    [
      '44015444025645045745055946075a46085c460a5d460b5e470d60470e61471063471164471365481467481668481769',
      '48186a481a6c481b6d481c6e481d6f481f70482071482173482374482475482576482677482878482979472a7a472c7a',
      '472d7b472e7c472f7d46307e46327e46337f463480453581453781453882443983443a83443b84433d84433e85423f85',
      '4240864241864142874144874045884046883f47883f48893e49893e4a893e4c8a3d4d8a3d4e8a3c4f8a3c508b3b518b',
      '3b528b3a538b3a548c39558c39568c38588c38598c375a8c375b8d365c8d365d8d355e8d355f8d34608d34618d33628d',
      '33638d32648e32658e31668e31678e31688e30698e306a8e2f6b8e2f6c8e2e6d8e2e6e8e2e6f8e2d708e2d718e2c718e',
      '2c728e2c738e2b748e2b758e2a768e2a778e2a788e29798e297a8e297b8e287c8e287d8e277e8e277f8e27808e26818e',
      '26828e26828e25838e25848e25858e24868e24878e23888e23898e238a8d228b8d228c8d228d8d218e8d218f8d21908d',
      '21918c20928c20928c20938c1f948c1f958b1f968b1f978b1f988b1f998a1f9a8a1e9b8a1e9c891e9d891f9e891f9f88',
      '1fa0881fa1881fa1871fa28720a38620a48621a58521a68522a78522a88423a98324aa8325ab8225ac8226ad8127ad81',
      '28ae8029af7f2ab07f2cb17e2db27d2eb37c2fb47c31b57b32b67a34b67935b77937b87838b9773aba763bbb753dbc74',
      '3fbc7340bd7242be7144bf7046c06f48c16e4ac16d4cc26c4ec36b50c46a52c56954c56856c66758c7655ac8645cc863',
      '5ec96260ca6063cb5f65cb5e67cc5c69cd5b6ccd5a6ece5870cf5773d05675d05477d1537ad1517cd2507fd34e81d34d',
      '84d44b86d54989d5488bd6468ed64590d74393d74195d84098d83e9bd93c9dd93ba0da39a2da37a5db36a8db34aadc32',
      'addc30b0dd2fb2dd2db5de2bb8de29bade28bddf26c0df25c2df23c5e021c8e020cae11fcde11dd0e11cd2e21bd5e21a',
      'd8e219dae319dde318dfe318e2e418e5e419e7e419eae51aece51befe51cf1e51df4e61ef6e620f8e621fbe723fde725',
    ].join(''),
  ),
};

export const CIVIDIS: ColourMap = {
  name: 'cividis',
  lut: unpack(
    [
      '00224e00234f00245100255300255400265600275800285900285b00295d002a5f002a61002b62002c64002c66002d68',
      '002e6a002e6c002f6d00306f0030700031700031710132710533710833700c34700f357012357014367016377018376f',
      '1a386f1c396f1e3a6f203a6f213b6e233c6e243c6e263d6e273e6e293f6e2a3f6d2b406d2d416d2e416d2f426d31436d',
      '32436d33446d34456c35456c36466c38476c39486c3a486c3b496c3c4a6c3d4a6c3e4b6c3f4c6c404c6c414d6c424e6c',
      '434e6c444f6c45506c46516c47516c48526c49536c4a536c4b546c4c556c4d556c4e566c4f576c50576c51586d52596d',
      '535a6d545a6d555b6d555c6d565c6d575d6d585e6d595e6e5a5f6e5b606e5c616e5d616e5e626e5e636f5f636f60646f',
      '61656f62656f636670646770656870656870666970676a71686a71696b716a6c716b6d726c6d726c6e726d6f726e6f73',
      '6f70737071737172747272747273747374757474757575757676767777767777777878777979777a7a787b7a787c7b78',
      '7d7c787e7c787e7d787f7e78807f78817f788280798381798482798582798683798784788885788985788a86788b8778',
      '8c88788d88788e89788f8a78908b78918b78928c78928d78938e78948e77958f779690779791779892779992779a9376',
      '9b94769c95769d95769e96769f9775a09875a19975a29975a39a74a49b74a59c74a69c74a79d73a89e73a99f73aaa073',
      'aba072aca172ada272aea371afa471b0a571b1a570b3a670b4a76fb5a86fb6a96fb7a96eb8aa6eb9ab6dbaac6dbbad6d',
      'bcae6cbdae6cbeaf6bbfb06bc0b16ac1b26ac2b369c3b369c4b468c5b568c6b667c7b767c8b866c9b965cbb965ccba64',
      'cdbb63cebc63cfbd62d0be62d1bf61d2c060d3c05fd4c15fd5c25ed6c35dd7c45cd9c55cdac65bdbc75adcc859ddc858',
      'dec958dfca57e0cb56e1cc55e2cd54e4ce53e5cf52e6d051e7d150e8d24fe9d34eead34cebd44bedd54aeed649efd748',
      'f0d846f1d945f2da44f3db42f5dc41f6dd3ff7de3ef8df3cf9e03afbe138fce236fde334fee434fee535fee636fee838',
    ].join(''),
  ),
};

export const COLOUR_MAPS = { viridis: VIRIDIS, cividis: CIVIDIS } as const;
export type ColourMapName = keyof typeof COLOUR_MAPS;

/** What a pixel without data (NaN, outside the photo) is drawn as: white, which neither map contains. */
export const NO_DATA_RGB: [number, number, number] = [255, 255, 255];

function resolve(map: ColourMap | ColourMapName): ColourMap {
  return typeof map === 'string' ? COLOUR_MAPS[map] : map;
}

/** Lookup-table index for a value on a [lo, hi] scale (clamped to the ends). */
export function colourIndex(value: number, lo: number, hi: number): number {
  if (!(hi > lo)) return 128;
  const t = (value - lo) / (hi - lo);
  if (!(t > 0)) return 0;
  if (t >= 1) return 255;
  return Math.min(255, Math.floor(t * 256));
}

/** sRGB 8-bit colour of one value on a [lo, hi] scale. */
export function colourOf(value: number, range: [number, number], map: ColourMap | ColourMapName): [number, number, number] {
  if (!Number.isFinite(value)) return [...NO_DATA_RGB];
  const lut = resolve(map).lut;
  const i = colourIndex(value, range[0], range[1]) * 3;
  return [lut[i]!, lut[i + 1]!, lut[i + 2]!];
}

export interface RgbRaster {
  width: number;
  height: number;
  /** interleaved 8-bit sRGB, length width * height * 3 */
  rgb: Uint8Array;
}

/**
 * Paint a single-channel plane in false colour: values at or below range[0] get the map's first
 * entry, at or above range[1] its last; non-finite values (no data) are white.
 */
export function falseColour(plane: Plane, range: [number, number], map: ColourMap | ColourMapName): RgbRaster {
  const { width, height, data } = plane;
  if (data.length !== width * height) throw new Error(`plane data length ${data.length} is not ${width}x${height}`);
  const lut = resolve(map).lut;
  const [lo, hi] = range;
  const rgb = new Uint8Array(width * height * 3);
  for (let p = 0, o = 0; p < data.length; p++, o += 3) {
    const v = data[p]!;
    if (!Number.isFinite(v)) {
      rgb[o] = NO_DATA_RGB[0];
      rgb[o + 1] = NO_DATA_RGB[1];
      rgb[o + 2] = NO_DATA_RGB[2];
      continue;
    }
    const i = colourIndex(v, lo, hi) * 3;
    rgb[o] = lut[i]!;
    rgb[o + 1] = lut[i + 1]!;
    rgb[o + 2] = lut[i + 2]!;
  }
  return { width, height, rgb };
}
