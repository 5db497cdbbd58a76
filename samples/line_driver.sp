Bipolar line driver: common-emitter gain stage and an emitter follower into a cable
* Scenario of our own: a 5 V receiver front end, fed from a 5 kohm source, drives 50 ohm terminated
* wiring. The collector-base capacitance of Q1 bridges the inverting stage (gain about -15): its
* Miller image at the base, seen through the source resistance, competes with the cable.
* Invented model cards.
.model qn npn (is=2e-16 bf=120 vaf=60 ikf=20m rb=120 re=1 rc=20
+ cje=0.4p vje=0.8 mje=0.35 cjc=0.25p vjc=0.7 mjc=0.33 xcjc=0.8 tf=25p tr=2n cjs=0.3p vjs=0.6 mjs=0.4)

Vcc vcc 0 dc 5
* the source carries the base bias (DC-coupled input)
Vin src 0 dc 0.9 ac 1
Rs src b1 5k
Q1 c1 b1 e1 0 qn
Rc vcc c1 2.2k
Re e1 0 100
* emitter follower and the line
Q2 vcc c1 out 0 qn
Rf out 0 330
Rline out far 50
Cline far 0 15p
Rterm far 0 50
.op
.end
