* Cascode gain stage written the way foundry libraries and schematic tools write it
* (our own scenario, invented level-1 cards): binned models chosen by L and W/nf,
* device wrappers named after their instances, .option scale, spaced parameter
* expressions with a statistical function at its nominal value, and AC=mag phase.
.option scale=1u
.param corner_factor=1 mc_switch=0
.param sw_vth = {0.0+corner_factor*0.02} + mc_switch*agauss(0,0.01,3)
.param vdd_val=1.8 vin_dc=0.555

.subckt nfet_w d g s b w=1 l=1 nf=1 mult=1
.param ad = 'int((nf+1)/2) * w/nf * 0.29' pd = '2*(w/nf + 0.29)'
Mdev d g s b nch w={w} l={l} nf={nf} ad={ad} as={ad} pd={pd} ps={pd}
.model nch.1 nmos level=1 lmin=0.15e-6 lmax=0.5e-6 wmin=0.4e-6 wmax=5e-6
+ vto={0.45+sw_vth} kp=260u lambda=0.25 tox=4.1n cgso=0.28n cgdo=0.28n cgbo=0.05n
+ cj=1.1m mj=0.44 cjsw=0.1n mjsw=0.3 pb=0.73
.model nch.2 nmos level=1 lmin=0.5e-6 lmax=20e-6 wmin=0.4e-6 wmax=5e-6
+ vto={0.47+sw_vth} kp=250u lambda=0.06 tox=4.1n cgso=0.28n cgdo=0.28n cgbo=0.05n
+ cj=1.1m mj=0.44 cjsw=0.1n mjsw=0.3 pb=0.73
.ends nfet_w

vdd vdd 0 {vdd_val}
vin in 0 DC={vin_dc} AC=1 0
vcas cas 0 1.2
rsrc in g 2k
xm1 x g 0 0 nfet_w w=2 l=0.15 nf=2 m=2
xm2 out cas x 0 nfet_w w=4 l=1 nf=2
rl vdd out 20k
cload out 0 30f
.meas ac bw when vdb(out)=vdb(out)-3
.end
