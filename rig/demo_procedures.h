// The demo campaign's procedures, compiled in so `kneepoint demo` runs from
// any folder. The same text is shipped in procedures/library/demo/ for users
// to read and copy; tests/rig/demo_campaign_test.cpp checks that both copies
// agree, so edit the .kpp file and paste it here. Internal to demo_campaign.cpp.
#pragma once

#include <string_view>

namespace kp::demo {

struct DemoProcedureText {
  std::string_view file;  // under procedures/library/demo/
  std::string_view text;
};

inline constexpr DemoProcedureText kDemoProcedures[] = {
    {"rated-capacity.kpp", R"kpdemo(# Demo campaign, part 1: rated-capacity check of the cell the (invented)
# field-node team wants to qualify, in the style of IEC 61960-3 clause 7.3.1
# (see ../../../../shared/REFERENCES.md): charge by the maker's method (CC-CV),
# rest 1 h to 4 h (from memory), discharge at 0.2 It to the end voltage
# (secondary source). Datasheet claim of the invented cell: 2500 mAh.
name "demo: rated capacity, 0.2 It"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-time=16h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 2h every=10s log-change=2mV
discharge 0.2C until voltage<=2.75V every=5s
)kpdemo"},
    {"node-duty-cycle.kpp", R"kpdemo(# Demo campaign, part 2a: the product's own load. An invented field sensor
# node with a cellular modem wakes once an hour, reads its sensors, brings the
# modem up and sends one report (scenario and numbers invented, no source):
#   sleep    35 uA  for 3590 s  (compressed to 5 s in the test)
#   sense    18 mA  for 3 s
#   modem   220 mA  for 6 s     (network attach and registration)
#   burst     2 A   for 1 s     (transmit peak)
# Real mean current about 0.97 mA; the compressed test cycle (15 s) averages
# about 0.23 A, so the cell empties in about half a day of simulated time.
# The plan keeps the real sleep length, so analysis can project back.
name "demo: field-node duty cycle"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-current=2.5A max-time=30h

profile field-node
  phase sleep 35uA/3590s
  phase sense 18mA/3s
  phase modem 220mA/6s
  phase burst 2A/1s
end

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
cycle field-node compress=5s until voltage<=2.75V every=5s
)kpdemo"},
    {"node-peak-pulses.kpp", R"kpdemo(# Demo campaign, part 2b: the product's transmit peak (2 A) as a pulse train,
# 2 s on and 8 s off (mean 0.4 A). The rests let the cell's charge wells
# refill and its polarisation relax between bursts (Kinetic Battery Model,
# Manwell & McGowan 1993, from memory), so it should deliver more than the
# same 2 A drawn without pause (node-peak-continuous.kpp). Comparison method:
# common practice, no source. Numbers invented.
name "demo: 2 A peak as pulses, 2 s on / 8 s off"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-current=2.5A max-time=20h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
pulse 2A/2s 0A/8s until voltage<=2.75V every=2s
)kpdemo"},
    {"node-peak-continuous.kpp", R"kpdemo(# Demo campaign, part 2c: the continuous partner of node-peak-pulses.kpp at
# the SAME PEAK current, 2 A without interruption to the same end voltage
# (comparison method: common practice, no source).
# Numbers invented.
name "demo: 2 A peak, continuous"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-current=2.5A max-time=8h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
discharge 2A until voltage<=2.75V every=5s
)kpdemo"},
    {"dcir-over-dod.kpp", R"kpdemo(# Demo campaign, part 3: DC internal resistance over depth of discharge, by
# the two-current method of IEC 61960-3 clause 7.7 (see
# ../../../../shared/REFERENCES.md): I1 = 0.2 It for 10 s, I2 = 1.0 It for
# 1 s, R = (U1 - U2) / (I2 - I1) (secondary source). Between points the cell
# gives 10 % of its rated capacity at 0.5 It and rests 30 min (rest length:
# common practice, no source).
name "demo: DC-IR over depth of discharge"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-time=30h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 30min every=10s log-change=2mV
repeat until voltage<=2.75V
  dcir 0.2C/10s 1C/1s every=100ms
  discharge 0.5C until charge>=10% or voltage<=2.75V every=5s
  rest 30min every=10s log-change=2mV
end
)kpdemo"},
    {"rate-0a5.kpp", R"kpdemo(# Demo campaign, part 4: one point of the Peukert series on a second cell of
# the same batch: full charge, rest, then a constant 0.5 A to the end voltage.
# The time to the end voltage at each current feeds the fit C_p = I^k t
# (Peukert 1897, from memory). Numbers invented.
name "demo: constant 0.5 A (Peukert series)"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-time=16h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
discharge 500mA until voltage<=2.75V every=5s
)kpdemo"},
    {"rate-1a.kpp", R"kpdemo(# Demo campaign, part 4: one point of the Peukert series on a second cell of
# the same batch: full charge, rest, then a constant 1 A to the end voltage.
# The time to the end voltage at each current feeds the fit C_p = I^k t
# (Peukert 1897, from memory). Numbers invented.
name "demo: constant 1 A (Peukert series)"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-time=16h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
discharge 1A until voltage<=2.75V every=5s
)kpdemo"},
    {"rate-2a.kpp", R"kpdemo(# Demo campaign, part 4: one point of the Peukert series on a second cell of
# the same batch: full charge, rest, then a constant 2 A to the end voltage.
# The time to the end voltage at each current feeds the fit C_p = I^k t
# (Peukert 1897, from memory). Numbers invented.
name "demo: constant 2 A (Peukert series)"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-time=16h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
discharge 2A until voltage<=2.75V every=5s
)kpdemo"},
    {"rate-3a.kpp", R"kpdemo(# Demo campaign, part 4: one point of the Peukert series on a second cell of
# the same batch: full charge, rest, then a constant 3 A to the end voltage.
# The time to the end voltage at each current feeds the fit C_p = I^k t
# (Peukert 1897, from memory). Numbers invented.
name "demo: constant 3 A (Peukert series)"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=55degC max-time=16h

charge 0.5C to 4.2V until current<=0.02C or time>=4h every=10s
rest 1h every=10s log-change=2mV
discharge 3A until voltage<=2.75V every=2s
)kpdemo"},
    {"failing-cell.kpp", R"kpdemo(# Demo campaign, part 6: a cell that goes wrong. The simulator is told to let
# this cell heat itself from a few minutes into the run (its thermal-runaway
# fault option); the over-temperature limit must switch the load off and end
# the run as aborted, with the reason logged (limit setting: common practice,
# no source). Numbers invented.
name "demo: 1 It discharge, over-temperature guard"
cell li-ion rated=2500mAh nominal=3.65V max=4.2V cutoff=2.75V max-temp=60degC
safety max-temp=50degC when-hot=abort max-time=4h

rest 5min every=10s
discharge 1C until voltage<=2.75V every=2s
)kpdemo"},
};

}  // namespace kp::demo
