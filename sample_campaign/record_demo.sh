#!/usr/bin/env bash
# The demo's bench work for the invented Quorrel Q-Brook 7 flood-gauge node: people,
# equipment with calibrations, and the runs recorded from invented logger files and
# observation sheets (bench_data.py). One run, water-8@aged-1, is made invalid (its tank
# level dipped) and repeated; S04 leaks at its cable gland.
#   sample_campaign/record_demo.sh OUT_DIR     (testplan and python on PATH)
set -euo pipefail
out=${1:-demo-out}
here=$(cd "$(dirname "$0")" && pwd)
mkdir -p "$out"
export TESTPLAN_DB="$out/testplan.db"
rm -f "$TESTPLAN_DB" "$TESTPLAN_DB-wal" "$TESTPLAN_DB-shm"
"${PYTHON:-python}" "$here/bench_data.py" "$out/bench"
bench="$out/bench"
q=--quiet
S=QC-2027-014-S

# People, their roles and their keys (an invented demo passphrase). DK founds the store as
# its manager and enrols her own first key; after that she signs every grant and enrolment.
export TESTPLAN_KEY_PASSPHRASE="q-brook demo key, not for use"
keys="$out/keys"
rm -rf "$keys" && mkdir -p "$keys"
for who in DK JT MO RP LV; do
    testplan keys new $who --out "$keys/$who.pem"
done
testplan people add DK --name "Dana Kerrow" --role manager --title "laboratory manager" $q
mgr=(--by DK --key "$keys/DK.pem")
testplan keys register DK --public "$keys/DK.pem.pub" "${mgr[@]}" $q
testplan people add AK --name "Anna Kowal" --role operator "${mgr[@]}" $q
testplan people add JT --name "Jo Tran" --role operator --role checker "${mgr[@]}" $q
testplan people add MO --name "Mark Osei" --role checker --role approver --title "quality manager" "${mgr[@]}" $q
testplan people add RP --name "Rita Pereira" --role preparer --title "test engineer" "${mgr[@]}" $q
testplan people add LV --name "Lars Vik" --role reviewer --title "technical reviewer" "${mgr[@]}" $q
for who in JT MO RP LV; do
    testplan keys register $who --public "$keys/$who.pem.pub" "${mgr[@]}" $q
done
mo=(--by MO --key "$keys/MO.pem")
jt=(--by JT --key "$keys/JT.pem")

testplan init "$here/flood-gauge-node.toml" --by AK $q
testplan record receive ${S}01 ${S}02 ${S}03 ${S}04 ${S}05 ${S}06 --on 2027-01-06 \
    --condition "new, in sealed cartons, no visible damage; cable tails 2 m" --by AK $q

# Equipment and calibrations (values in each channel's plan unit unless a unit is given).
cal() { testplan equipment calibrate "$@" --provider "Gellimoor Calibration Ltd" --by AK $q; }
testplan equipment add LT-03 --description "tank level and temperature transmitter" --serial 88213 --by AK $q
cal LT-03 --channel lowest_point_depth --certificate VC-2026-118 --calibrated 2026-06-01 --due 2027-06-01 --uncertainty "4 mm" --range "0 mm" "3000 mm"
cal LT-03 --channel water_temperature --certificate VC-2026-118 --calibrated 2026-06-01 --due 2027-06-01 --uncertainty "0.2 K" --range "0 degC" "40 degC"
testplan equipment add TT-07 --description "two-channel surface thermometer" --serial T7-5521 --by AK $q
cal TT-07 --channel specimen_temperature --certificate VC-2026-201 --calibrated 2026-09-01 --due 2027-09-01 --uncertainty "0.5 K" --range "-10 degC" "60 degC"
testplan equipment add FM-02 --description "jet flow meter with nozzle pressure gauge" --serial FM-20-114 --by AK $q
cal FM-02 --channel flow --certificate VC-2026-077 --calibrated 2026-04-15 --due 2027-04-15 --uncertainty "1.2 L/min" --range "10 L/min" "150 L/min"
cal FM-02 --channel nozzle_pressure --certificate VC-2026-077 --calibrated 2026-04-15 --due 2027-04-15 --uncertainty "2 kPa" --range "0 kPa" "400 kPa"
testplan equipment add TQ-11 --description "endurance rig: cycle counter and three torque stations" --serial RIG-3 --by AK $q
cal TQ-11 --channel torque --certificate VC-2026-163 --calibrated 2026-08-10 --due 2027-08-10 --uncertainty "0.4 N*mm" --range "0 N*mm" "100 N*mm"
cal TQ-11 --channel cycle_count --certificate VC-2026-163 --calibrated 2026-08-10 --due 2027-08-10 --uncertainty 0 --k 1
testplan equipment add SC-01 --description "salt-mist cabinet temperature and humidity sensors" --serial SMC-880 --by AK $q
cal SC-01 --channel cabinet_temperature --certificate VC-2026-190 --calibrated 2026-07-20 --due 2027-07-20 --uncertainty "0.4 K" --range "10 degC" "60 degC"
cal SC-01 --channel humid_temperature --certificate VC-2026-190 --calibrated 2026-07-20 --due 2027-07-20 --uncertainty "0.4 K" --range "10 degC" "60 degC"
cal SC-01 --channel humid_rh --certificate VC-2026-190 --calibrated 2026-07-20 --due 2027-07-20 --uncertainty "1.5 %" --range "20 %" "98 %"
testplan equipment add FC-01 --description "fog collectors (80 cm^2) and graduated cylinder" --by AK $q
cal FC-01 --channel fog_collection --certificate VC-2026-191 --calibrated 2026-07-20 --due 2027-07-20 --uncertainty "0.05 mL/h"
testplan equipment add PH-02 --description "pH meter" --serial PH-4410 --by AK $q
cal PH-02 --channel solution_ph --certificate VC-2026-205 --calibrated 2026-11-02 --due 2027-05-02 --uncertainty 0.05 --range 2 12

testplan equipment add PG-01 --description "absolute pressure gauge for leak tests" --serial PG-7781 --by AK $q
cal PG-01 --channel test_pressure --certificate VC-2026-233 --calibrated 2026-10-05 --due 2027-10-05 --uncertainty "0.05 mbar" --range "800 mbar" "1600 mbar"
testplan equipment add IR-04 --description "insulation resistance tester" --serial IR-3310 --by AK $q
cal IR-04 --channel insulation_resistance --certificate VC-2026-240 --calibrated 2026-10-12 --due 2027-10-12 --uncertainty "20 Mohm" --range "1 Mohm" "10000 Mohm"

amb=(--ambient-temperature "21.5 degC" --ambient-humidity "46 %" --ambient-pressure "1012 hPa")

# Jet test of S01.
run=water-6@ip-verification-1
testplan record start $run --operator AK --equipment FM-02 "${amb[@]}" --state-ok --at 2027-01-12T08:05Z $q
testplan record import $run "$bench/jet-ip1.csv" --map "Q1[L/min]=flow@FM-02" --map "P1[bar]=nozzle_pressure@FM-02" --by AK $q
testplan record observe $run --sheet "$bench/after-jets.toml" --by AK --at 2027-01-12T08:09Z $q
testplan record finish $run --by AK --at 2027-01-12T08:09Z $q
testplan record check $run "${mo[@]}" --at 2027-01-12T11:30Z $q

# 72 h immersion at 2 m of S01 and S02.
run=water-8@ip-verification-1
testplan record start $run --operator AK --equipment LT-03 --equipment TT-07 "${amb[@]}" --state-ok \
    --precondition "24 h at 21 degC after re-sealing" --at 2027-01-12T16:10Z $q
testplan record import $run "$bench/tank-ip1.csv" --tz Europe/London --time-column timestamp \
    --map "depth_cm[cm]=lowest_point_depth@LT-03" --map "water_C[degC]=water_temperature@LT-03" \
    --map "s1_C[degC]=specimen_temperature@TT-07#${S}01" --map "s2_C[degC]=specimen_temperature@TT-07#${S}02" --by AK $q
testplan record observe $run --sheet "$bench/after-ip1.toml" --by AK --at 2027-01-15T16:15Z $q
testplan record finish $run --by AK --at 2027-01-15T16:20Z $q
testplan record check $run "${mo[@]}" --at 2027-01-18T09:00Z $q

# Mode-selector knob endurance on S03-S05 (three rig stations).
run=endurance-mode-selector-knob@aged-1
testplan record start $run --operator JT --equipment TQ-11 "${amb[@]}" --state-ok --at 2027-01-12T11:00Z $q
testplan record import $run "$bench/rig-knob.csv" --map "cycles[cycle]=cycle_count@TQ-11" \
    --map "tq_st1[N*mm]=torque@TQ-11#${S}03" --map "tq_st2[N*mm]=torque@TQ-11#${S}04" \
    --map "tq_st3[N*mm]=torque@TQ-11#${S}05" --by JT $q
testplan record observe $run --note "no failures; detents crisp on all three at 54 000 cycles" --by JT --at 2027-01-16T05:00Z $q
testplan record finish $run --by JT --at 2027-01-16T05:05Z $q
testplan record check $run "${mo[@]}" --at 2027-01-18T10:00Z $q

# Salt mist, IEC 60068-2-52 method 2, on S03-S05.
run=salt-mist@aged-1
testplan record start $run --operator AK --equipment SC-01 --equipment FC-01 --equipment PH-02 "${amb[@]}" \
    --state-ok --at 2027-01-18T08:00Z $q
testplan record import $run "$bench/cabinet.csv" --map "cab_T[degC]=cabinet_temperature@SC-01" \
    --map "hum_T[degC]=humid_temperature@SC-01" --map "hum_RH[%]=humid_rh@SC-01" --by AK $q
testplan record import $run "$bench/fog.csv" --map "fog_ml_h[mL/h]=fog_collection@FC-01" \
    --map "ph=solution_ph@PH-02" --by AK $q
for n in 03 04 05; do
    rating=9; [ $n = 05 ] && rating=10
    testplan record observe $run --specimen ${S}$n --checkpoint "after 3 cycles and recovery" --rating $rating \
        --function pass --by AK --at 2027-01-21T07:30Z $q
done
testplan record deviation $run --description "cabinet temperature 34.4 to 35.7 degC in the spray phase, above 35 degC for 40 min" \
    --covers salt-mist.spray_temperature --reason "cabinet heater controller overshoot after the door was opened" --approved-by MO --key "$keys/MO.pem" --by AK --at 2027-01-19T11:00Z $q
testplan record finish $run --by AK --at 2027-01-21T08:00Z $q
testplan record check $run "${jt[@]}" --at 2027-01-21T15:00Z $q

# Jet tests of S02 (verification leg) and of S03-S05 after salt mist.
jet_run() {  # run, specimen file suffix, start, finish, operator, checker
    testplan record start "$1" --operator "$5" --equipment FM-02 "${amb[@]}" --state-ok --at "$3" $q
    testplan record import "$1" "$bench/jet-$2.csv" --map "Q1[L/min]=flow@FM-02" --map "P1[bar]=nozzle_pressure@FM-02" --by "$5" $q
    testplan record observe "$1" --sheet "$bench/after-jets-$2.toml" --by "$5" --at "$4" $q
    testplan record finish "$1" --by "$5" --at "$4" $q
    testplan record check "$1" --by "$6" --key "$keys/$6.pem" --at "$4" $q
}
jet_run water-6@ip-verification-2 ip2 2027-01-12T09:05Z 2027-01-12T09:09Z AK MO
jet_run water-6@aged-1 aged1 2027-01-21T09:05Z 2027-01-21T09:09Z AK JT
jet_run water-6@aged-2 aged2 2027-01-21T10:05Z 2027-01-21T10:09Z AK JT
jet_run water-6@aged-3 aged3 2027-01-21T11:05Z 2027-01-21T11:09Z AK JT

# 72 h immersion of S03 and S04 after ageing: the tank is topped up at hour 30 and its
# level drawn down below the declared depth for 4 min, so the run is invalid and repeated.
run=water-8@aged-1
testplan record start $run --operator AK --equipment LT-03 --equipment TT-07 "${amb[@]}" --state-ok --at 2027-01-21T14:10Z $q
testplan record import $run "$bench/tank-aged1.csv" --tz Europe/London --time-column timestamp \
    --map "depth_cm[cm]=lowest_point_depth@LT-03" --map "water_C[degC]=water_temperature@LT-03" \
    --map "s1_C[degC]=specimen_temperature@TT-07#${S}03" --map "s2_C[degC]=specimen_temperature@TT-07#${S}04" --by AK $q
testplan record observe $run --sheet "$bench/after-aged1.toml" --by AK --at 2027-01-24T14:15Z $q
testplan record deviation $run --description "tank topped up at hour 30 while the specimens stayed immersed" \
    --reason "evaporation lowered the level" --approved-by MO --key "$keys/MO.pem" --by AK --at 2027-01-22T20:30Z $q
testplan record finish $run --by AK --at 2027-01-24T14:20Z $q
testplan record invalidate $run --reason "tank level drawn down below the declared depth for 4 min at hour 30 while topping up" --by MO $q

# 72 h immersion of S05 after ageing.
run=water-8@aged-2
testplan record start $run --operator JT --equipment LT-03 --equipment TT-07 "${amb[@]}" --state-ok --at 2027-01-25T08:10Z $q
testplan record import $run "$bench/tank-aged2.csv" --tz Europe/London --time-column timestamp --skip-unmapped \
    --map "depth_cm[cm]=lowest_point_depth@LT-03" --map "water_C[degC]=water_temperature@LT-03" \
    --map "s1_C[degC]=specimen_temperature@TT-07#${S}05" --by JT $q
testplan record observe $run --sheet "$bench/after-aged2.toml" --by JT --at 2027-01-28T08:25Z $q
testplan record finish $run --by JT --at 2027-01-28T08:30Z $q
testplan record check $run "${mo[@]}" --at 2027-01-28T11:00Z $q

# The repeat of water-8@aged-1, planned when it was invalidated: S04 leaks again.
run=water-8@aged-1-repeat2
testplan record start $run --operator AK --equipment LT-03 --equipment TT-07 "${amb[@]}" --state-ok --at 2027-01-28T09:00Z $q
testplan record import $run "$bench/tank-aged1-repeat.csv" --tz Europe/London --time-column timestamp \
    --map "depth_cm[cm]=lowest_point_depth@LT-03" --map "water_C[degC]=water_temperature@LT-03" \
    --map "s1_C[degC]=specimen_temperature@TT-07#${S}03" --map "s2_C[degC]=specimen_temperature@TT-07#${S}04" --by AK $q
testplan record observe $run --sheet "$bench/after-aged1.toml" --by AK --at 2027-01-31T09:05Z $q
testplan record finish $run --by AK --at 2027-01-31T09:10Z $q
testplan record check $run "${jt[@]}" --at 2027-01-31T11:00Z $q

testplan store check
testplan record list

# Judge every finished run from its data; water-8@aged-1 fails (exit 3 is expected here).
testplan judge || [ $? -eq 3 ]

# Sign-off by three different people with their own keys, in that order, after the last
# data check (2027-01-31 11:00 UTC).
testplan sign QC-2027-014 --role prepared --as RP --key "$keys/RP.pem" --at 2027-01-31T14:00Z $q
testplan sign QC-2027-014 --role reviewed --as LV --key "$keys/LV.pem" --at 2027-01-31T15:00Z $q
testplan sign QC-2027-014 --role approved --as MO --key "$keys/MO.pem" --at 2027-01-31T16:00Z $q

# The issued test report, signed by the approver issuing it, with its proof embedded; the
# manager keys exported as the trust anchor (kept apart from the store).
testplan report QC-2027-014 -o "$out/report.pdf" --issue-date 2027-02-01 "${mo[@]}" $q
testplan keys trust --out "$out/trust.json"
# The PDF against the store and its records...
testplan verify "$out/report.pdf" --trust "$out/trust.json"
# ...and from the PDF alone, with the store moved away.
abs=$(cd "$out" && pwd)
mkdir -p "$abs/away"
for f in "$abs"/testplan.db*; do mv "$f" "$abs/away/"; done
(cd "$abs/bench" && env -u TESTPLAN_DB testplan verify "$abs/report.pdf" --trust "$abs/trust.json")
mv "$abs"/away/testplan.db* "$abs/" && rmdir "$abs/away"
