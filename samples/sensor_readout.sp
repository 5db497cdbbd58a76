Sensor readout front end: resistively loaded common-source gain stage driving a source follower
* Scenario of our own: a photodiode-style current input (modelled as a Norton source with its
* junction capacitance) is converted and amplified before an on-chip sampling capacitor.
* Model cards are invented for this demo; they describe no real process.
.param vdd=1.8 wn=4u ln=0.5u rload=20k cpd=200f
.global vdd

.model nch nmos level=1 (vto=0.45 kp=180u gamma=0.4 phi=0.8 lambda=0.08
+ tox=8n cgso=0.3n cgdo=0.3n cgbo=0.1n cj=0.9m mj=0.45 cjsw=0.25n mjsw=0.3 pb=0.8 ld=40n)

Vsup vdd 0 dc {vdd}
* the sensor: its source resistance and capacitance, biased at the amplifier's input level
Vin  sens 0 dc 0.65 ac 1
Rs   sens in 50k
Cpd  in 0 {cpd}

* common-source gain stage: the gate-drain overlap bridges an inverting gain
M1 out1 in 0 0 nch w={wn} l={ln} ad=5p as=5p pd=12u ps=12u
Rl vdd out1 {rload}

* source follower buffer and its current sink
M2 vdd out1 out 0 nch w=20u l=0.5u ad=10p as=10p pd=22u ps=22u
M3 out bias 0 0 nch w=4u l=1u ad=2p as=2p pd=5u ps=5u
Vb bias 0 dc 0.7

* sampling capacitor and wiring to it
Rw out samp 200
Csamp samp 0 500f
.op
.end
