* DYN_NAND3 -- designer's schematic (pre-layout view) of the footed dynamic
* NAND3 in the invented dsk18 demo process.  Units: W/L in um, AD/AS in
* um^2 (p suffix), PD/PS in um, gate edge included.
* AD/AS/PD/PS are given only on contacted nodes (X, VDD, VSS, OUT); the
* internal stack nodes n1, n2, n3 carry none, so they are estimated.
* Models nch/pch are defined by the simulation deck that includes this file.

.subckt DYN_NAND3 VDD VSS CLK A B C X OUT
* precharge and keeper (keeper gate = OUT)
MPRE  X   CLK VDD VDD pch W=0.6u L=0.18u AD=0.288p PD=2.16u AS=0.288p PS=2.16u
MKEEP X   OUT VDD VDD pch W=0.3u L=0.36u AD=0.144p PD=1.56u AS=0.144p PS=1.56u
* evaluation stack X-A-n1-B-n2-C-n3-footer-VSS
MA    X   A   n1  VSS nch W=1.0u L=0.18u AD=0.48p PD=2.96u
MB    n1  B   n2  VSS nch W=1.0u L=0.18u
MC    n2  C   n3  VSS nch W=1.0u L=0.18u
MFOOT n3  CLK VSS VSS nch W=1.2u L=0.18u AS=0.576p PS=3.36u
* output inverter
MINVN OUT X   VSS VSS nch W=0.6u L=0.18u AD=0.288p PD=2.16u AS=0.288p PS=2.16u
MINVP OUT X   VDD VDD pch W=1.2u L=0.18u AD=0.576p PD=3.36u AS=0.576p PS=3.36u
* wire estimate on the dynamic node
CWX   X   VSS 1.3f
.ends DYN_NAND3
