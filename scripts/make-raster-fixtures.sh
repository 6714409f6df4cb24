#!/usr/bin/env bash
# Generate the GeoTIFF fixtures of the raster reader/writer tests with GDAL, and record what GDAL itself reports
# for each of them (size, geotransform, CRS, nodata, values) in test/fixtures/rasters/expected.json, so that the
# tests compare our reader against GDAL rather than against ourselves.
#
# Needs GDAL with its Python bindings and numpy (Debian: gdal-bin python3-gdal python3-numpy).
# Usage: scripts/make-raster-fixtures.sh            (writes into test/fixtures/rasters/)
# Deterministic: the same GDAL version writes the same bytes.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
out="${1:-$here/../test/fixtures/rasters}"
mkdir -p "$out"
out="$(cd "$out" && pwd)"

# The Python with GDAL bindings: $PYTHON if set, else the system one (a pyenv shim may lack osgeo).
python=""
for candidate in "${PYTHON:-}" /usr/bin/python3 python3; do
  if [ -n "$candidate" ] && "$candidate" -c 'from osgeo import gdal; import numpy' 2>/dev/null; then
    python="$candidate"
    break
  fi
done
if [ -z "$python" ]; then
  echo "make-raster-fixtures: no python3 with 'osgeo' (GDAL bindings) and numpy; install python3-gdal python3-numpy" >&2
  exit 1
fi

rm -f "$out"/*.tif "$out"/*.tif.aux.xml "$out"/*.tif.msk "$out"/expected.json

"$python" - "$out" <<'PY'
import hashlib
import json
import math
import os
import struct
import sys

import numpy as np
from osgeo import gdal, osr

gdal.UseExceptions()
out = sys.argv[1]
GT = [500000.0, 50.0, 0.0, 4110000.0, 0.0, -50.0]  # invented origin, 50 m cells
NX, NY = 37, 23  # odd sizes so that 16x16 tiles and 5-row strips are partial at the edges


def path(name):
    return os.path.join(out, name)


def srs_wkt(epsg=None, proj4=None):
    srs = osr.SpatialReference()
    if epsg is not None:
        srs.ImportFromEPSG(epsg)
    else:
        srs.ImportFromProj4(proj4)
    return srs.ExportToWkt()


def smooth_field(nx=NX, ny=NY, base=100.0, quantum=None):
    """A smooth, non-trivial surface (float64); quantised when asked so that it compresses well."""
    r = np.arange(ny, dtype=np.float64)[:, None]
    c = np.arange(nx, dtype=np.float64)[None, :]
    v = base + 0.37 * c - 0.21 * r + 3.0 * np.sin(c / 5.0) * np.cos(r / 7.0)
    if quantum:
        v = np.round(v / quantum) * quantum
    return v


def with_holes(a, fill):
    """Mark a few cells as missing (a corner, an interior block, one edge cell)."""
    a = a.copy()
    a[0, 0] = fill
    a[5:8, 10:14] = fill
    a[-1, -1] = fill
    return a


def create(name, data, dtype, options=(), nodata=None, gt=GT, wkt=None, metadata=None, bands=None, check=True,
           scale=None, offset=None, unit=None, mask=None, overviews=None):
    """Write with the GTiff driver; `bands` is a list of 2-D arrays for multi-band files; `mask` (0 = masked) as an
    internal per-dataset mask band."""
    arrays = bands if bands is not None else [data]
    ny, nx = arrays[0].shape
    ds = gdal.GetDriverByName('GTiff').Create(path(name), nx, ny, len(arrays), dtype, list(options))
    if gt is not None:
        ds.SetGeoTransform(gt)
    if wkt is not None:
        ds.SetProjection(wkt)
    if metadata:
        for k, v in metadata.items():
            ds.SetMetadataItem(k, v)
    if mask is not None:
        gdal.SetConfigOption('GDAL_TIFF_INTERNAL_MASK', 'YES')
        ds.CreateMaskBand(gdal.GMF_PER_DATASET)
    for i, a in enumerate(arrays):
        band = ds.GetRasterBand(i + 1)
        if nodata is not None:
            band.SetNoDataValue(nodata)
        if scale is not None:
            band.SetScale(scale)
        if offset is not None:
            band.SetOffset(offset)
        if unit is not None:
            band.SetUnitType(unit)
        band.WriteArray(a)
    if mask is not None:
        ds.GetRasterBand(1).GetMaskBand().WriteArray(mask)
    if overviews:
        ds.BuildOverviews('NEAREST', overviews)
    ds = None
    gdal.SetConfigOption('GDAL_TIFF_INTERNAL_MASK', None)
    if check:
        # GDAL must read back exactly what it was given (this caught GDAL 3.6 misreading big-endian PREDICTOR=3)
        ds = gdal.Open(path(name))
        for i, a in enumerate(arrays):
            back = ds.GetRasterBand(i + 1).ReadAsArray()
            if 'PIXELTYPE=SIGNEDBYTE' in options:
                back = back.view(np.int8)
                a = np.asarray(a).view(np.int8)
            want = np.asarray(a).astype(back.dtype)
            if not np.array_equal(back, want, equal_nan=back.dtype.kind == 'f'):
                raise RuntimeError('GDAL does not read back what it wrote in %s band %d' % (name, i + 1))
        ds = None


def translate(src, name, fmt='GTiff', options=()):
    gdal.Translate(path(name), path(src), format=fmt, creationOptions=list(options))


UTM = srs_wkt(epsg=32633)
F = smooth_field()

# ---- readable fixtures: every layout, compression, sample type and predictor the reader must support ----------
good = []

create('f32-strip-none.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['COMPRESS=NONE', 'BLOCKYSIZE=5'], nodata=-9999.0, wkt=UTM)
good.append('f32-strip-none.tif')

create('f32-tiled-deflate-pred3.tif', with_holes(F, np.nan), gdal.GDT_Float32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE', 'PREDICTOR=3'], nodata=float('nan'), wkt=UTM)
good.append('f32-tiled-deflate-pred3.tif')

create('f32-strip-lzw-pred3.tif', with_holes(F, -3.4028234663852886e+38), gdal.GDT_Float32,
       ['COMPRESS=LZW', 'PREDICTOR=3', 'BLOCKYSIZE=4'], nodata=-3.4028234663852886e+38, wkt=UTM)
good.append('f32-strip-lzw-pred3.tif')

create('f32-tiled-zstd-nan.tif', with_holes(F, np.nan), gdal.GDT_Float32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=ZSTD'], wkt=UTM)  # NaN cells, no nodata tag
good.append('f32-tiled-zstd-nan.tif')

create('f64-tiled-zstd-pred3.tif', with_holes(F * 1.000000001, -9999.0), gdal.GDT_Float64,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=ZSTD', 'PREDICTOR=3'], nodata=-9999.0, wkt=UTM)
good.append('f64-tiled-zstd-pred3.tif')

create('f64-strip-deflate.tif', with_holes(F / 3.0, -9999.0), gdal.GDT_Float64,
       ['COMPRESS=DEFLATE', 'BLOCKYSIZE=7'], nodata=-9999.0, wkt=UTM)
good.append('f64-strip-deflate.tif')

create('f32-strip-deflate-pred2.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['COMPRESS=DEFLATE', 'PREDICTOR=2', 'BLOCKYSIZE=6'], nodata=-9999.0, wkt=UTM)
good.append('f32-strip-deflate-pred2.tif')

create('f32-bigendian-pred2.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE', 'PREDICTOR=2', 'ENDIANNESS=BIG'],
       nodata=-9999.0, wkt=UTM)
good.append('f32-bigendian-pred2.tif')

I = np.round((F - 100.0) * 250.0)  # integers spanning negative and positive values
create('i16-strip-lzw-pred2.tif', with_holes(I, -32768), gdal.GDT_Int16,
       ['COMPRESS=LZW', 'PREDICTOR=2', 'BLOCKYSIZE=5'], nodata=-32768, wkt=UTM)
good.append('i16-strip-lzw-pred2.tif')

create('i16-bigendian-pred2.tif', with_holes(I, -32768), gdal.GDT_Int16,
       ['COMPRESS=DEFLATE', 'PREDICTOR=2', 'ENDIANNESS=BIG', 'BLOCKYSIZE=5'], nodata=-32768, wkt=UTM)
good.append('i16-bigendian-pred2.tif')

# (No big-endian Float32 with PREDICTOR=3: GDAL 3.6 reads its own such file back as byte-swapped garbage.)
create('f32-bigendian-lzw.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=LZW', 'ENDIANNESS=BIG'], nodata=-9999.0, wkt=UTM)
good.append('f32-bigendian-lzw.tif')

U8 = np.mod(np.round(F * 7.0), 250)
create('u8-tiled-deflate-pred2.tif', with_holes(U8, 255), gdal.GDT_Byte,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE', 'PREDICTOR=2'], nodata=255, wkt=UTM)
good.append('u8-tiled-deflate-pred2.tif')

# GDAL 3.6 has no Int8 type: signed bytes are Byte with PIXELTYPE=SIGNEDBYTE; write the two's-complement bits.
I8 = (np.mod(np.round(F * 3.0), 256) - 128).astype(np.int8)
create('i8-strip-none.tif', with_holes(I8, -128).astype(np.int8).view(np.uint8), gdal.GDT_Byte,
       ['PIXELTYPE=SIGNEDBYTE', 'BLOCKYSIZE=6'], nodata=-128, wkt=UTM)
good.append('i8-strip-none.tif')

create('u16-tiled-zstd-pred2.tif', with_holes(np.round(F * 400.0), 0), gdal.GDT_UInt16,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=ZSTD', 'PREDICTOR=2'], nodata=0, wkt=UTM)
good.append('u16-tiled-zstd-pred2.tif')

create('i32-strip-deflate-pred2.tif', with_holes(np.round((F - 103.0) * 1.0e6), -99999), gdal.GDT_Int32,
       ['COMPRESS=DEFLATE', 'PREDICTOR=2', 'BLOCKYSIZE=3'], nodata=-99999, wkt=UTM)
good.append('i32-strip-deflate-pred2.tif')

create('u32-tiled-lzw.tif', with_holes(np.round(F * 3.0e7), 4294967295), gdal.GDT_UInt32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=LZW'], nodata=4294967295, wkt=UTM)
good.append('u32-tiled-lzw.tif')

create('f32-bigtiff.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['BIGTIFF=YES', 'TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE', 'PREDICTOR=3'],
       nodata=-9999.0, wkt=UTM)
good.append('f32-bigtiff.tif')

create('f32-bigtiff-strip.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['BIGTIFF=YES', 'COMPRESS=NONE', 'BLOCKYSIZE=5'], nodata=-9999.0, wkt=UTM)
good.append('f32-bigtiff-strip.tif')

# Cloud-optimised GeoTIFF as GDAL's COG driver writes it: 128-pixel tiles minimum, so a larger (quantised,
# well-compressing) grid to get real overviews; the reader must use the first (full-resolution) image.
C = with_holes(smooth_field(150, 140, quantum=0.25), -9999.0)
create('cog-source.tif', C, gdal.GDT_Float32, ['COMPRESS=NONE'], nodata=-9999.0, wkt=UTM)
translate('cog-source.tif', 'f32-cog.tif', fmt='COG',
          options=['BLOCKSIZE=128', 'COMPRESS=DEFLATE', 'PREDICTOR=YES', 'OVERVIEWS=AUTO', 'OVERVIEW_COUNT=1'])
os.remove(path('cog-source.tif'))
good.append('f32-cog.tif')

# PixelIsPoint: GDAL shifts the tiepoint by half a pixel on write and back on read; the reader must match GDAL.
create('f32-pixelispoint.tif', with_holes(F, -9999.0), gdal.GDT_Float32, ['COMPRESS=DEFLATE'], nodata=-9999.0,
       wkt=UTM, metadata={'AREA_OR_POINT': 'Point'})
good.append('f32-pixelispoint.tif')

# A south-up grid (positive pixel height): GDAL writes a ModelTransformation tag (no rotation) instead of
# ModelPixelScale + ModelTiepoint.
create('f32-modeltransform.tif', with_holes(F, -9999.0), gdal.GDT_Float32, ['COMPRESS=DEFLATE'], nodata=-9999.0,
       gt=[500000.0, 50.0, 0.0, 4108850.0, 0.0, 50.0], wkt=UTM)
good.append('f32-modeltransform.tif')

bands = [with_holes(F, -9999.0), with_holes(F * 2.0, -9999.0), with_holes(F - 50.0, -9999.0)]
create('f32-3band-pixel.tif', None, gdal.GDT_Float32, ['INTERLEAVE=PIXEL', 'COMPRESS=DEFLATE', 'BLOCKYSIZE=8'],
       nodata=-9999.0, wkt=UTM, bands=bands)
good.append('f32-3band-pixel.tif')
create('f32-3band-band.tif', None, gdal.GDT_Float32,
       ['INTERLEAVE=BAND', 'TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=LZW', 'PREDICTOR=3'],
       nodata=-9999.0, wkt=UTM, bands=bands)
good.append('f32-3band-band.tif')

create('f32-geographic.tif', with_holes(F, -9999.0), gdal.GDT_Float32, ['COMPRESS=DEFLATE'], nodata=-9999.0,
       gt=[14.25, 0.0005, 0.0, 37.125, 0.0, -0.0005], wkt=srs_wkt(epsg=4326))
good.append('f32-geographic.tif')

# A user-defined projected CRS (ProjectedCSTypeGeoKey = 32767): no EPSG code, GeoKeys kept.
create('f32-userdefined-crs.tif', with_holes(F, -9999.0), gdal.GDT_Float32, ['COMPRESS=DEFLATE'], nodata=-9999.0,
       wkt=srs_wkt(proj4='+proj=tmerc +lat_0=0 +lon_0=13.7 +k=0.9997 +x_0=400000 +y_0=-4000000 +ellps=GRS80 '
                         '+units=m +no_defs'))
good.append('f32-userdefined-crs.tif')

# Per-band scale and offset (GDAL_METADATA items with role "scale"/"offset"): GDAL's unscaled value is
# stored x scale + offset, with the nodata value compared with the stored value first.
create('u16-scale.tif', with_holes(np.round(F * 40.0), 0), gdal.GDT_UInt16, ['COMPRESS=DEFLATE', 'BLOCKYSIZE=5'],
       nodata=0, wkt=UTM, scale=0.001)  # e.g. conductivity stored in mm/d
good.append('u16-scale.tif')
create('i16-scale-offset.tif', with_holes(I, -32768), gdal.GDT_Int16,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=LZW', 'PREDICTOR=2'], nodata=-32768, wkt=UTM,
       scale=0.004, offset=100.0, unit='m')
good.append('i16-scale-offset.tif')
create('f32-scale-offset.tif', with_holes(F, -9999.0), gdal.GDT_Float32, ['COMPRESS=DEFLATE', 'PREDICTOR=3'],
       nodata=-9999.0, wkt=UTM, scale=0.3048, offset=-12.5)  # e.g. heads stored in feet above another datum
good.append('f32-scale-offset.tif')

# A compound CRS whose vertical part is in US survey feet: GDAL gives the band that unit (from the vertical CRS's
# GeoKey) when no unit item is set.
ds = gdal.GetDriverByName('GTiff').Create(path('f32-vertical-ftus.tif'), NX, NY, 1, gdal.GDT_Float32, ['COMPRESS=DEFLATE'])
ds.SetGeoTransform(GT)
compound = osr.SpatialReference()
compound.SetFromUserInput('EPSG:32633+6360')
ds.SetSpatialRef(compound)
ds.GetRasterBand(1).SetNoDataValue(-9999.0)
ds.GetRasterBand(1).WriteArray(with_holes(F, -9999.0))
ds = None
good.append('f32-vertical-ftus.tif')

# Internal nodata masks (a second IFD with the NewSubfileType mask bit): masked cells are missing, as GDAL's mask
# band says. One tiled with DEFLATE, one in LZW strips with an internal overview (whose own mask must be ignored),
# and one made by `gdal_translate -mask` from a second band.
M = np.full((NY, NX), 255, dtype=np.uint8)
M[2:6, 20:31] = 0
M[NY - 1, :] = 0
M[10, 3] = 0
create('f32-mask-tiled.tif', with_holes(F, -9999.0), gdal.GDT_Float32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE'], nodata=-9999.0, wkt=UTM, mask=M)
good.append('f32-mask-tiled.tif')
create('f32-mask-strip-ovr.tif', F, gdal.GDT_Float32, ['COMPRESS=LZW', 'BLOCKYSIZE=4'], wkt=UTM, mask=M,
       overviews=[2])
good.append('f32-mask-strip-ovr.tif')
create('mask-source.tif', None, gdal.GDT_Float32, ['COMPRESS=NONE'], wkt=UTM, bands=[F, M.astype(np.float32)])
gdal.SetConfigOption('GDAL_TIFF_INTERNAL_MASK', 'YES')
gdal.Translate(path('f32-translate-mask.tif'), path('mask-source.tif'), bandList=[1], maskBand=2,
               creationOptions=['COMPRESS=ZSTD', 'TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16'])
gdal.SetConfigOption('GDAL_TIFF_INTERNAL_MASK', None)
os.remove(path('mask-source.tif'))
good.append('f32-translate-mask.tif')

# ---- files the reader must refuse with an input error naming the file ------------------------------------------
bad = {}

with open(path('not-a-tiff.tif'), 'w') as f:
    f.write('x,y,head\n500000,4110000,101.5\n')
bad['not-a-tiff.tif'] = 'not a TIFF file'

open(path('empty.tif'), 'wb').close()
bad['empty.tif'] = 'empty file'

create('no-georef.tif', F, gdal.GDT_Float32, ['COMPRESS=NONE', 'PROFILE=BASELINE'], gt=None)
bad['no-georef.tif'] = 'no geotransform'

create('rotated.tif', F, gdal.GDT_Float32, ['COMPRESS=NONE'], gt=[500000.0, 50.0, 5.0, 4110000.0, 4.0, -50.0],
       wkt=UTM)
bad['rotated.tif'] = 'rotation terms in ModelTransformation'

create('negative-pixel-width.tif', F, gdal.GDT_Float32, ['COMPRESS=NONE'],
       gt=[500000.0, -50.0, 0.0, 4110000.0, 0.0, -50.0], wkt=UTM)
bad['negative-pixel-width.tif'] = 'negative pixel width'

create('f64-pred2.tif', F, gdal.GDT_Float64, ['COMPRESS=DEFLATE', 'PREDICTOR=2'], wkt=UTM)
bad['f64-pred2.tif'] = 'Float64 with horizontal differencing predictor'

create('cfloat32.tif', F.astype(np.complex64), gdal.GDT_CFloat32, ['COMPRESS=NONE'], wkt=UTM)
bad['cfloat32.tif'] = 'complex samples'

create('bit1.tif', (F > 102).astype(np.uint8), gdal.GDT_Byte, ['NBITS=1', 'COMPRESS=NONE'], wkt=UTM)
bad['bit1.tif'] = '1-bit samples'

create('i64.tif', np.round(F * 1e3).astype(np.int64), gdal.GDT_Int64, ['COMPRESS=NONE'], wkt=UTM)
bad['i64.tif'] = '64-bit integer samples'

# GDAL 3.6 reads its own big-endian Float32 + PREDICTOR=3 file back as byte-swapped garbage, so there is no
# trustworthy reference for that layout: refuse it.
create('f32-bigendian-pred3.tif', F, gdal.GDT_Float32,
       ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE', 'PREDICTOR=3', 'ENDIANNESS=BIG'],
       wkt=UTM, check=False)
bad['f32-bigendian-pred3.tif'] = 'big-endian floating-point predictor (GDAL 3.6 misreads it as well)'

# Truncated files: GDAL writes the IFD first, data after, so cutting the tail removes image data only.
create('truncated-strip.tif', F, gdal.GDT_Float32, ['COMPRESS=NONE', 'BLOCKYSIZE=4'], wkt=UTM)
size = os.path.getsize(path('truncated-strip.tif'))
with open(path('truncated-strip.tif'), 'r+b') as f:
    f.truncate(size - 700)
bad['truncated-strip.tif'] = 'strip data cut short'

create('truncated-tile.tif', F, gdal.GDT_Float32, ['TILED=YES', 'BLOCKXSIZE=16', 'BLOCKYSIZE=16', 'COMPRESS=DEFLATE'],
       wkt=UTM)
size = os.path.getsize(path('truncated-tile.tif'))
with open(path('truncated-tile.tif'), 'r+b') as f:
    f.truncate(size - 40)
bad['truncated-tile.tif'] = 'tile data cut short'


# A colour table (palette photometric): the values are colour indices of classes, not measurements.
create('palette.tif', with_holes(U8, 255), gdal.GDT_Byte, ['COMPRESS=DEFLATE'], wkt=UTM)
ds = gdal.Open(path('palette.tif'), gdal.GA_Update)
table = gdal.ColorTable()
for i in range(256):
    table.SetColorEntry(i, (i, 255 - i, (3 * i) % 256, 255))
ds.GetRasterBand(1).SetColorTable(table)
ds = None
bad['palette.tif'] = 'palette (colour table) raster: values are class indices'

# A value band with an alpha band (ExtraSamples = unassociated alpha): GDAL masks the values with it.
create('alpha.tif', None, gdal.GDT_Byte, ['ALPHA=YES', 'COMPRESS=DEFLATE'], wkt=UTM, bands=[with_holes(U8, 255), M])
bad['alpha.tif'] = 'an alpha band, which GDAL uses as a mask'

# GDAL keeps what it cannot write into the file in side files, and applies them when reading: a scale and offset
# in a .aux.xml (set on a file opened read-only), a mask in a .msk file. Neither may be ignored.
create('pam-scale.tif', np.round(F * 40.0), gdal.GDT_UInt16, ['COMPRESS=DEFLATE'], wkt=UTM)
ds = gdal.Open(path('pam-scale.tif'))  # read-only: GDAL writes the scale into pam-scale.tif.aux.xml
ds.GetRasterBand(1).SetScale(0.001)
ds = None
assert os.path.exists(path('pam-scale.tif.aux.xml'))
bad['pam-scale.tif'] = 'scale kept in a .aux.xml side file'
gdal.SetConfigOption('GDAL_TIFF_INTERNAL_MASK', 'NO')
create('external-mask.tif', F, gdal.GDT_Float32, ['COMPRESS=DEFLATE'], wkt=UTM)
ds = gdal.Open(path('external-mask.tif'), gdal.GA_Update)
ds.CreateMaskBand(gdal.GMF_PER_DATASET)
ds.GetRasterBand(1).GetMaskBand().WriteArray(M)
ds = None
gdal.SetConfigOption('GDAL_TIFF_INTERNAL_MASK', None)
assert os.path.exists(path('external-mask.tif.msk'))
bad['external-mask.tif'] = 'mask kept in a .msk side file'

def patch_double_tag(name, tag, index, value):
    """Overwrite one double of a classic little-endian TIFF tag stored out of line (GDAL writes those)."""
    with open(path(name), 'r+b') as f:
        b = f.read()
        assert b[:4] == b'II*\x00'
        ifd = struct.unpack('<I', b[4:8])[0]
        n = struct.unpack('<H', b[ifd:ifd + 2])[0]
        for i in range(n):
            entry = ifd + 2 + 12 * i
            t, typ, count, offset = struct.unpack('<HHII', b[entry:entry + 12])
            if t == tag:
                assert typ == 12 and count > index
                f.seek(offset + 8 * index)
                f.write(struct.pack('<d', value))
                return
    raise RuntimeError('tag %d not found in %s' % (tag, name))


# GDAL refuses to write a zero pixel size, so write a normal file and zero its ModelPixelScale x.
create('zero-pixel-size.tif', F, gdal.GDT_Float32, ['COMPRESS=NONE'], wkt=UTM)
patch_double_tag('zero-pixel-size.tif', 33550, 0, 0.0)
bad['zero-pixel-size.tif'] = 'zero pixel width'


def write_header_only_tiff(name, width, height, tile):
    """A tiny hand-made classic TIFF whose header claims a huge Float64 image (tiled, DEFLATE): the reader must
    refuse it from the header alone, before allocating anything."""
    tiles_across = -(-width // tile)
    tiles_down = -(-height // tile)
    ntiles = tiles_across * tiles_down
    entries = []  # (tag, type, count, payload bytes)

    def short(tag, v):
        entries.append((tag, 3, 1, struct.pack('<HH', v, 0)))

    def long(tag, v):
        entries.append((tag, 4, 1, struct.pack('<I', v)))

    long(256, width)
    long(257, height)
    short(258, 64)
    short(259, 8)
    short(262, 1)
    short(277, 1)
    short(284, 1)
    long(322, tile)
    long(323, tile)
    entries.append((324, 4, ntiles, b''))  # TileOffsets, filled below
    entries.append((325, 4, ntiles, b''))  # TileByteCounts
    short(339, 3)
    entries.append((33550, 12, 3, struct.pack('<3d', 50.0, 50.0, 0.0)))
    entries.append((33922, 12, 6, struct.pack('<6d', 0, 0, 0, 500000.0, 4110000.0, 0)))
    entries.append((34735, 3, 8, struct.pack('<8H', 1, 1, 0, 1, 3072, 0, 1, 32633)))
    entries.sort(key=lambda e: e[0])
    ifd_offset = 8
    data_offset = ifd_offset + 2 + 12 * len(entries) + 4
    tile_payload = b'\x78\x9c\x03\x00\x00\x00\x00\x01'  # an empty zlib stream
    blobs = b''
    table = b''
    out_of_line = {}
    for tag, typ, count, payload in entries:
        if tag in (324, 325) or len(payload) > 4:
            out_of_line[tag] = len(blobs)
            if tag == 324:
                blobs += b'\x00' * (4 * ntiles)
            elif tag == 325:
                blobs += struct.pack('<%dI' % ntiles, *([len(tile_payload)] * ntiles))
            else:
                blobs += payload
    tile_data_offset = data_offset + len(blobs)
    offsets_at = out_of_line[324]
    blobs = blobs[:offsets_at] + struct.pack('<%dI' % ntiles, *([tile_data_offset] * ntiles)) + \
        blobs[offsets_at + 4 * ntiles:]
    for tag, typ, count, payload in entries:
        if tag in out_of_line:
            table += struct.pack('<HHII', tag, typ, count, data_offset + out_of_line[tag])
        else:
            table += struct.pack('<HHI', tag, typ, count) + payload
    body = b'II*\x00' + struct.pack('<I', ifd_offset) + struct.pack('<H', len(entries)) + table + \
        struct.pack('<I', 0) + blobs + tile_payload
    with open(path(name), 'wb') as f:
        f.write(body)


write_header_only_tiff('huge-cells.tif', 100000, 100000, 50000)
bad['huge-cells.tif'] = '1e10 cells (more than 2^31)'
write_header_only_tiff('huge-memory.tif', 46000, 46000, 23000)
bad['huge-memory.tif'] = '2.1e9 Float64 cells (just under 2^31): about 17 GB as doubles'


# ---- record what GDAL reports ------------------------------------------------------------------------------------
def canonical_sha256(values):
    """SHA-256 of the values as little-endian float64 with every missing cell as the canonical quiet NaN."""
    v = np.array(values, dtype='<f8')
    v[np.isnan(v)] = np.nan
    raw = bytearray(v.tobytes())
    nan = struct.pack('<d', float('nan'))
    for i in np.flatnonzero(np.isnan(v)):
        raw[8 * i:8 * i + 8] = nan
    return hashlib.sha256(bytes(raw)).hexdigest()


def band_values(band):
    a = band.ReadAsArray().astype(np.float64)
    if band.GetMetadataItem('PIXELTYPE', 'IMAGE_STRUCTURE') == 'SIGNEDBYTE':
        a = np.where(a > 127, a - 256, a)  # GDAL < 3.7 convention for signed bytes
    nodata = band.GetNoDataValue()
    if nodata is not None:
        if band.DataType == gdal.GDT_Float32:
            nodata = float(np.float32(nodata))
        a[a == nodata] = np.nan
    # GDAL's unscaled value (as `gdal_translate -unscale` computes it): stored x scale + offset, nodata excluded first
    scale = band.GetScale()
    offset = band.GetOffset()
    if (scale is not None and scale != 1.0) or (offset is not None and offset != 0.0):
        a = a * (1.0 if scale is None else scale) + (0.0 if offset is None else offset)
    # a per-dataset mask band (internal mask): 0 = no data
    if band.GetMaskFlags() == gdal.GMF_PER_DATASET:
        a[band.GetMaskBand().ReadAsArray() == 0] = np.nan
    return a.ravel()


def describe(name):
    ds = gdal.Open(path(name))
    srs = ds.GetSpatialRef()
    epsg = None
    geographic = None
    if srs is not None:
        geographic = bool(srs.IsGeographic())
        if srs.GetAuthorityName(None) == 'EPSG':
            epsg = int(srs.GetAuthorityCode(None))
        elif srs.IsCompound() and srs.GetAuthorityName('PROJCS') == 'EPSG':
            epsg = int(srs.GetAuthorityCode('PROJCS'))  # the horizontal part of a compound CRS
    band1 = ds.GetRasterBand(1)
    # unscaled values are doubles (stored x scale + offset), whatever the stored type
    scaled = (band1.GetScale() not in (None, 1.0)) or (band1.GetOffset() not in (None, 0.0))
    float32_values = band1.DataType == gdal.GDT_Float32 and not scaled
    entry = {
        'file': name,
        'width': ds.RasterXSize,
        'height': ds.RasterYSize,
        'bandCount': ds.RasterCount,
        'gdalType': gdal.GetDataTypeName(band1.DataType),
        'signedByte': band1.GetMetadataItem('PIXELTYPE', 'IMAGE_STRUCTURE') == 'SIGNEDBYTE',
        'geoTransform': list(ds.GetGeoTransform()),
        'epsg': epsg,
        'geographic': geographic,
        'nodata': None,
        'float32Values': float32_values,
        'scale': band1.GetScale(),
        'offset': band1.GetOffset(),
        'unit': band1.GetUnitType() or None,
        'masked': band1.GetMaskFlags() == gdal.GMF_PER_DATASET,
        'bands': [],
    }
    nd = band1.GetNoDataValue()
    if nd is not None:
        entry['nodata'] = 'nan' if math.isnan(nd) else nd
    for b in range(1, ds.RasterCount + 1):
        v = band_values(ds.GetRasterBand(b))
        record = {'band': b, 'count': int(v.size), 'missing': int(np.isnan(v).sum()), 'sha256': canonical_sha256(v)}
        if v.size <= 2000:
            if b > 1:
                entry['bands'].append(record)  # further bands: checksum only
                continue
            # Float32 values as their shortest float32 text (read back with Math.fround), others exactly
            if float32_values:
                record['values'] = [None if math.isnan(x) else float(str(np.float32(x))) for x in v]
            else:
                record['values'] = [None if math.isnan(x) else float(x) for x in v]
        else:
            # large fixture: checksum plus a sample of cells (row, col, value)
            h = entry['height']
            w = entry['width']
            cells = [(0, 0), (0, w - 1), (h - 1, 0), (h - 1, w - 1), (h // 2, w // 2), (1, 129), (130, 2), (139, 149)]
            record['samples'] = [[r, c, None if math.isnan(v[r * w + c]) else float(v[r * w + c])] for r, c in cells]
        entry['bands'].append(record)
    ds = None
    return entry


def gdal_refusal(name):
    """What GDAL says about a bad file (for the record; our reader must refuse it too)."""
    gdal.PushErrorHandler('CPLQuietErrorHandler')
    try:
        ds = gdal.Open(path(name))
        if ds is None:
            return 'GDAL cannot open it'
        gt = ds.GetGeoTransform(can_return_null=True)
        band = ds.GetRasterBand(1)
        try:
            band.ReadAsArray()
            read = 'reads'
        except Exception as e:  # noqa: BLE001
            read = 'read fails: ' + str(e).splitlines()[0]
        return 'opens (%s, %s, geotransform %s); %s' % (gdal.GetDataTypeName(band.DataType),
                                                        '%dx%d' % (ds.RasterXSize, ds.RasterYSize), gt, read)
    except Exception as e:  # noqa: BLE001
        return 'open fails: ' + str(e).splitlines()[0]
    finally:
        gdal.PopErrorHandler()


expected = {
    'generator': 'scripts/make-raster-fixtures.sh',
    'gdalVersion': gdal.__version__,
    'good': [describe(n) for n in good],
    'bad': [{'file': n, 'why': why, 'gdal': gdal_refusal(n)} for n, why in bad.items()],
}
with open(path('expected.json'), 'w') as f:
    # one line per fixture keeps the file small and diffable
    f.write('{\n')
    f.write(' "generator": %s,\n "gdalVersion": %s,\n' % (json.dumps(expected['generator']),
                                                         json.dumps(expected['gdalVersion'])))
    for key in ('good', 'bad'):
        f.write(' "%s": [\n' % key)
        f.write(',\n'.join('  ' + json.dumps(e, separators=(',', ':')) for e in expected[key]))
        f.write('\n ]%s\n' % (',' if key == 'good' else ''))
    f.write('}\n')
total = sum(os.path.getsize(path(n)) for n in os.listdir(out))
print('make-raster-fixtures: %d readable + %d bad fixtures, %d bytes in %s' % (len(good), len(bad), total, out))
PY
