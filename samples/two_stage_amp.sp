Two-stage amplifier with Miller compensation for an on-chip reference buffer
* Scenario of our own: a five-transistor input stage, a common-source second stage and a
* compensation capacitor Cc across it, analysed open loop with both inputs at the common-mode
* level, as one checks a compensation; the second stage drives a resistive load. Cc is Miller by design (it sets the dominant pole), so it
* carries an inline waiver; the lint gate then looks at what else is Miller-dominated.
* Invented model cards; they describe no real process.
.param vdd=3.3 cc=1.5p
.subckt pair inp inn out tail vdd
M1 x inp tail 0 nch w=10u l=1u ad=5p as=5p pd=12u ps=12u
M2 out inn tail 0 nch w=10u l=1u ad=5p as=5p pd=12u ps=12u
M3 x x vdd vdd pch w=20u l=1u ad=10p as=10p pd=22u ps=22u
M4 out x vdd vdd pch w=20u l=1u ad=10p as=10p pd=22u ps=22u
.ends pair
.model nch nmos level=1 (vto=0.55 kp=120u gamma=0.5 phi=0.8 lambda=0.04 tox=12n
+ cgso=0.4n cgdo=0.4n cgbo=0.2n cj=0.6m mj=0.5 cjsw=0.3n mjsw=0.33 pb=0.8 ld=60n)
.model pch pmos level=1 (vto=-0.6 kp=45u gamma=0.45 phi=0.8 lambda=0.05 tox=12n
+ cgso=0.4n cgdo=0.4n cgbo=0.2n cj=0.7m mj=0.5 cjsw=0.3n mjsw=0.33 pb=0.8 ld=60n)

Vdd vdd 0 {vdd}
Vinp inp 0 dc 1.6 ac 1
Vinn inn 0 dc 1.6
Xin inp inn o1 tail vdd pair
M5 tail nb 0 0 nch w=10u l=2u ad=5p as=5p pd=12u ps=12u
Vnb nb 0 dc 0.86
* second stage: PMOS common source into its load resistor
M6 out o1 vdd vdd pch w=80u l=1u ad=40p as=40p pd=82u ps=82u
Rl out 0 12k
Cc o1 out {cc} ; tauscan-waive: compensation capacitor, Miller by design
Cl out 0 2p
.op
.end
