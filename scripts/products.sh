#!/usr/bin/env bash
# Builds small product fixtures in the layouts that today's products are
# delivered in, from the real Landsat pixels of testdata/external/landsat/
# (run by scripts/testdata.sh after fetching them), into
# testdata/external/products/:
#   LE07_L2SP_..., LC08_L2SP_...   Landsat Collection 2 Level-2 products: the
#       surface reflectance band files *_SR_Bn.TIF, the surface temperature
#       band *_ST_Bn.TIF, QA_PIXEL, and an MTL carrying both the
#       LEVEL2_SURFACE_REFLECTANCE_PARAMETERS and the
#       LEVEL1_RADIOMETRIC_RESCALING groups (USGS "Landsat 8-9 Collection 2
#       Level 2 Science Product Guide" and "Landsat 7 ... Collection 2 Level
#       2 Science Product Guide": file names, groups and keys)
#   S2A_MSIL2A_...SAFE, S2B_MSIL2A_...SAFE   Sentinel-2 Level-2A product
#       folders: MTD_MSIL2A.xml (quantification value 10000 and the
#       BOA_ADD_OFFSET of -1000 of processing baseline 04.00 and later) and
#       GRANULE/<granule>/IMG_DATA/R10m and R20m band files, JPEG 2000,
#       named <tile>_<time>_<band>_<res>.jp2, with the SCL layer (ESA
#       "Sentinel-2 Products Specification Document", Level-2A)
# The pixels are real Landsat digital numbers; the products' identifiers,
# the Sentinel-2 dates and every coefficient not copied from the Landsat
# MTLs are invented (see testdata/README.md). Nothing is downloaded.
set -euo pipefail
# STAC items for the Level-1 band files (testdata/external/stac/).
bash scripts/stac.sh
src=testdata/external/landsat
dest=testdata/external/products
stamp=$dest/.built-v1
[ -f "$stamp" ] && exit 0
rm -rf "$dest.tmp" && mkdir -p "$dest.tmp"
out=$dest.tmp

q() { gdal_translate -q "$@"; }

# mtl_value FILE KEY: the value of KEY in an MTL file.
mtl_value() { sed -n "s/^ *$2 = \"\{0,1\}\([^\"]*\)\"\{0,1\}\r\{0,1\}$/\1/p" "$1" | head -n 1; }

# landsat_l2 L1PRODUCT L2PRODUCT "SR bands" "ST band" QA_CLEAR QA_CLOUD
landsat_l2() {
	local l1=$1 l2=$2 bands=$3 st=$4 clear=$5 cloud=$6
	local mtl=$src/${l1}_MTL.txt dir=$out/$l2
	mkdir -p "$dir"
	local n list=""
	for n in $bands; do
		# Surface reflectance files are UInt16 with fill 0.
		q -ot UInt16 -a_nodata 0 "$src/${l1}_B$n.TIF" "$dir/${l2}_SR_B$n.TIF"
		list="$list    FILE_NAME_BAND_$n = \"${l2}_SR_B$n.TIF\"\n"
	done
	q -ot UInt16 -a_nodata 0 "$src/${l1}_B$st.TIF" "$dir/${l2}_ST_B$st.TIF"
	list="$list    FILE_NAME_BAND_ST_B$st = \"${l2}_ST_B$st.TIF\"\n"
	list="$list    FILE_NAME_QUALITY_L1_PIXEL = \"${l2}_QA_PIXEL.TIF\"\n"
	# QA_PIXEL: the guide's "clear" value, and its "cloud, high confidence"
	# value where the first band is brightest (the brightest tenth).
	local first=${bands%% *} thr
	thr=$(gdalinfo -stats -hist "$src/${l1}_B$first.TIF" 2>/dev/null | sed -n 's/.*STATISTICS_MAXIMUM=//p' | head -n 1)
	local lo
	lo=$(gdalinfo -stats "$src/${l1}_B$first.TIF" 2>/dev/null | sed -n 's/.*STATISTICS_MEAN=//p' | head -n 1)
	gdal_calc.py --quiet -A "$src/${l1}_B$first.TIF" --type=UInt16 --NoDataValue=1 \
		--calc="where(A > ($lo + 0.75*($thr - $lo)), $cloud, $clear)" --outfile="$dir/${l2}_QA_PIXEL.TIF" >/dev/null
	local sr="" l1group="" b
	for b in $bands; do
		sr="$sr    REFLECTANCE_MULT_BAND_$b = 2.75e-05\n    REFLECTANCE_ADD_BAND_$b = -0.2\n"
		l1group="$l1group    REFLECTANCE_MULT_BAND_$b = $(mtl_value "$mtl" "REFLECTANCE_MULT_BAND_$b")\n    REFLECTANCE_ADD_BAND_$b = $(mtl_value "$mtl" "REFLECTANCE_ADD_BAND_$b")\n"
	done
	{
		echo "GROUP = LANDSAT_METADATA_FILE"
		echo "  GROUP = PRODUCT_CONTENTS"
		echo "    LANDSAT_PRODUCT_ID = \"$l2\""
		echo "    PROCESSING_LEVEL = \"L2SP\""
		echo "    COLLECTION_NUMBER = 02"
		printf "%b" "$list"
		echo "  END_GROUP = PRODUCT_CONTENTS"
		echo "  GROUP = IMAGE_ATTRIBUTES"
		echo "    SPACECRAFT_ID = \"$(mtl_value "$mtl" SPACECRAFT_ID)\""
		echo "    SENSOR_ID = \"$(mtl_value "$mtl" SENSOR_ID)\""
		echo "    DATE_ACQUIRED = $(mtl_value "$mtl" DATE_ACQUIRED)"
		echo "    SUN_ELEVATION = $(mtl_value "$mtl" SUN_ELEVATION)"
		echo "  END_GROUP = IMAGE_ATTRIBUTES"
		echo "  GROUP = LEVEL2_SURFACE_REFLECTANCE_PARAMETERS"
		printf "%b" "$sr"
		echo "  END_GROUP = LEVEL2_SURFACE_REFLECTANCE_PARAMETERS"
		echo "  GROUP = LEVEL1_RADIOMETRIC_RESCALING"
		printf "%b" "$l1group"
		echo "  END_GROUP = LEVEL1_RADIOMETRIC_RESCALING"
		echo "END_GROUP = LANDSAT_METADATA_FILE"
		echo "END"
	} >"$dir/${l2}_MTL.txt"
}

landsat_l2 LE07_L1TP_195025_20010730_20170204_01_T1 LE07_L2SP_195025_20010730_20200915_02_T1 "1 2 3 4 5 7" 6_VCID_1 5440 5896
landsat_l2 LC08_L1TP_195025_20130707_20170503_01_T1 LC08_L2SP_195025_20130707_20200912_02_T1 "1 2 3 4 5 6 7" 10 21824 22280
# The Level-2 ST band of Landsat 7 is ST_B6.
for f in "$out"/LE07_L2SP_*/*_ST_B6_VCID_1.TIF; do mv "$f" "${f/_ST_B6_VCID_1/_ST_B6}"; done
sed -i 's/FILE_NAME_BAND_ST_B6_VCID_1 = "\(.*\)_ST_B6_VCID_1.TIF"/FILE_NAME_BAND_ST_B6 = "\1_ST_B6.TIF"/' "$out"/LE07_L2SP_*/*_MTL.txt

# sentinel2 L1PRODUCT SAFE TILE TIME "S2BAND=LANDSATBAND ..."
sentinel2() {
	local l1=$1 safe=$2 tile=$3 time=$4 map=$5 sat=$6
	local granule=L2A_${tile}_A000000_${time}
	local img=$out/$safe/GRANULE/$granule/IMG_DATA
	mkdir -p "$img/R10m" "$img/R20m"
	local tmp
	tmp=$(mktemp -d)
	local pair band lb res files=""
	for pair in $map; do
		band=${pair%%=*} lb=${pair#*=}
		res=10
		case $band in B05 | B06 | B07 | B8A | B11 | B12 | SCL) res=20 ;; esac
		# The 40 x 40 window of the Landsat file on a 10 m grid, or its
		# 2 x 2 means on a 20 m grid; UInt16 digital numbers.
		local ulx=500000 uly=5500000
		if [ "$res" = 10 ]; then
			q -ot UInt16 -srcwin 0 0 40 40 -a_ullr $ulx $uly $((ulx + 400)) $((uly - 400)) -a_nodata none "$src/${l1}_B$lb.TIF" "$tmp/$band.tif"
		else
			q -ot UInt16 -srcwin 0 0 40 40 -outsize 20 20 -r average -a_ullr $ulx $uly $((ulx + 400)) $((uly - 400)) -a_nodata none "$src/${l1}_B$lb.TIF" "$tmp/$band.tif"
		fi
		if [ "$band" = SCL ]; then
			# Scene classes: vegetation (4), and cloud high probability
			# (9) on the brightest pixels, cloud shadow (3) on the darkest.
			local mean
			mean=$(gdalinfo -stats "$tmp/$band.tif" 2>/dev/null | sed -n 's/.*STATISTICS_MEAN=//p' | head -n 1)
			gdal_calc.py --quiet -A "$tmp/$band.tif" --type=Byte --NoDataValue=255 \
				--calc="where(A > 1.3*$mean, 9, where(A < 0.7*$mean, 3, 4))" --outfile="$tmp/scl.tif" >/dev/null
			mv "$tmp/scl.tif" "$tmp/$band.tif"
		fi
		local name=${tile}_${time}_${band}_${res}m
		q -of JP2OpenJPEG -co QUALITY=100 -co REVERSIBLE=YES -co YCBCR420=NO "$tmp/$band.tif" "$img/R${res}m/$name.jp2"
		files="$files        <IMAGE_FILE>GRANULE/$granule/IMG_DATA/R${res}m/$name</IMAGE_FILE>\n"
	done
	rm -rf "$tmp"
	local date=${time:0:4}-${time:4:2}-${time:6:2}T${time:9:2}:${time:11:2}:${time:13:2}.024Z
	python3 - "$out/$safe/MTD_MSIL2A.xml" "$sat" "$date" "$files" <<'PY'
import sys
path, sat, date, files = sys.argv[1:5]
files = files.replace("\\n", "\n")
# bandId, physicalBand, resolution, MIN, MAX, CENTRAL (nm): the Sentinel-2A
# spectral response's band table, rounded (ESA Sentinel-2 spectral response
# functions, document COPE-GSEG-EOPG-TN-15-0007, as remembered; values of
# the fixture, not of a measured sensor).
bands = [(0, "B1", 60, 430, 457, 442.7), (1, "B2", 10, 448, 546, 492.4), (2, "B3", 10, 538, 583, 559.8),
         (3, "B4", 10, 646, 684, 664.6), (4, "B5", 20, 695, 715, 704.1), (5, "B6", 20, 731, 749, 740.5),
         (6, "B7", 20, 769, 797, 782.8), (7, "B8", 10, 763, 908, 832.8), (8, "B8A", 20, 837, 881, 864.7),
         (9, "B9", 60, 932, 958, 945.1), (10, "B10", 60, 1337, 1412, 1373.5), (11, "B11", 20, 1539, 1682, 1613.7),
         (12, "B12", 20, 2078, 2320, 2202.4)]
spectral = "".join(
    f'        <Spectral_Information bandId="{i}" physicalBand="{p}">\n'
    f'          <RESOLUTION>{r}</RESOLUTION>\n'
    f'          <Wavelength>\n            <MIN unit="nm">{lo}</MIN>\n            <MAX unit="nm">{hi}</MAX>\n'
    f'            <CENTRAL unit="nm">{c}</CENTRAL>\n          </Wavelength>\n'
    f'        </Spectral_Information>\n' for i, p, r, lo, hi, c in bands)
offsets = "".join(f'        <BOA_ADD_OFFSET band_id="{i}">-1000</BOA_ADD_OFFSET>\n' for i, *_ in bands)
open(path, "w").write(f'''<?xml version="1.0" encoding="UTF-8"?>
<n1:Level-2A_User_Product xmlns:n1="https://psd-14.sentinel2.eo.esa.int/PSD/User_Product_Level-2A.xsd">
  <n1:General_Info>
    <Product_Info>
      <PRODUCT_START_TIME>{date}</PRODUCT_START_TIME>
      <PRODUCT_STOP_TIME>{date}</PRODUCT_STOP_TIME>
      <PROCESSING_LEVEL>Level-2A</PROCESSING_LEVEL>
      <PRODUCT_TYPE>S2MSI2A</PRODUCT_TYPE>
      <PROCESSING_BASELINE>05.09</PROCESSING_BASELINE>
      <Datatake datatakeIdentifier="GS2X_fixture">
        <SPACECRAFT_NAME>{sat}</SPACECRAFT_NAME>
        <DATATAKE_TYPE>INS-NOBS</DATATAKE_TYPE>
        <DATATAKE_SENSING_START>{date}</DATATAKE_SENSING_START>
      </Datatake>
      <Product_Organisation>
        <Granule_List>
          <Granule granuleIdentifier="fixture" imageFormat="JPEG2000">
{files.rstrip()}
          </Granule>
        </Granule_List>
      </Product_Organisation>
    </Product_Info>
    <Product_Image_Characteristics>
      <Special_Values>
        <SPECIAL_VALUE_TEXT>NODATA</SPECIAL_VALUE_TEXT>
        <SPECIAL_VALUE_INDEX>0</SPECIAL_VALUE_INDEX>
      </Special_Values>
      <QUANTIFICATION_VALUES_LIST>
        <BOA_QUANTIFICATION_VALUE unit="none">10000</BOA_QUANTIFICATION_VALUE>
        <AOT_QUANTIFICATION_VALUE unit="none">1000.0</AOT_QUANTIFICATION_VALUE>
        <WVP_QUANTIFICATION_VALUE unit="cm">1000.0</WVP_QUANTIFICATION_VALUE>
      </QUANTIFICATION_VALUES_LIST>
      <BOA_ADD_OFFSET_VALUES_LIST>
{offsets.rstrip()}
      </BOA_ADD_OFFSET_VALUES_LIST>
      <Spectral_Information_List>
{spectral.rstrip()}
      </Spectral_Information_List>
    </Product_Image_Characteristics>
  </n1:General_Info>
</n1:Level-2A_User_Product>
''')
PY
}

# Band by band: Sentinel-2's blue, green, red, red edges, NIR and SWIR from
# the Landsat band of the nearest wavelengths (the red edges and the narrow
# NIR from red and NIR); the pixels, not the physics, are the point.
sentinel2 LC08_L1TP_195025_20130707_20170503_01_T1 S2A_MSIL2A_20230614T103021_N0509_R108_T32UMU_20230614T140000.SAFE \
	T32UMU 20230614T103021 "B02=2 B03=3 B04=4 B08=5 B05=4 B06=5 B07=5 B8A=5 B11=6 B12=7 SCL=2" Sentinel-2A
sentinel2 LE07_L1TP_195025_20010730_20170204_01_T1 S2B_MSIL2A_20240618T103019_N0510_R108_T32UMU_20240618T140000.SAFE \
	T32UMU 20240618T103019 "B02=1 B03=2 B04=3 B08=4 B05=3 B06=4 B07=4 B8A=4 B11=5 B12=7 SCL=1" Sentinel-2B
find "$out" -name '*.aux.xml' -delete
touch "$out/.built-v1"
rm -rf "$dest" && mv "$out" "$dest"
