Cascoded gain stage for a slow sensor bus: the cascode device holds the input transistor's drain still
* Scenario of our own: a 1.8 V gain stage with a high source resistance. The cascode M2 keeps the
* gain from the gate of M1 to its drain near -1, so M1's gate-drain overlap is barely multiplied;
* compare with the plain stage in the same file (M11, fed by its own source), whose overlap
* capacitance is multiplied by the full gain.
* Invented model card; it describes no real process.
.param vdd=1.8 rsrc=100k
.model nch nmos level=1 (vto=0.42 kp=190u gamma=0.45 phi=0.85 lambda=0.12 tox=7n
+ cgso=0.35n cgdo=0.35n cgbo=0.1n cj=1m mj=0.45 cjsw=0.3n mjsw=0.3 pb=0.85 ld=35n)

Vdd vdd 0 {vdd}
Vin src 0 dc 0.6 ac 1
Rsrc src g1 {rsrc}

* cascoded stage: M1 input, M2 cascode, resistive load
M1 x g1 0 0 nch w=8u l=0.5u ad=4p as=4p pd=10u ps=10u
M2 out vcas x 0 nch w=8u l=0.5u ad=4p as=4p pd=10u ps=10u
Vcas vcas 0 dc 1.1
Rl vdd out 12k
Cload out 0 20f

* the same stage without the cascode, biased from its own (quiet) source for comparison
Vref src2 0 dc 0.6
Rsrc2 src2 g11 {rsrc}
M11 out2 g11 0 0 nch w=8u l=0.5u ad=4p as=4p pd=10u ps=10u
Rl2 vdd out2 12k
Cload2 out2 0 20f
.op
.end
