* DYN_NAND3_LONG -- designer's schematic (pre-layout view) of the cell whose
* layout routes n1 and n2 out on long metal1.  Same topology and W/L as
* DYN_NAND3; the schematic knows nothing of the long wires, and leaves out
* AD/AS/PD/PS everywhere, so every junction is estimated.
* Invented dsk18 demo process; models nch/pch come from the including deck.

.param wn=1.0u wfoot=1.2u wpre=0.6u wkeep=0.3u lkeep=0.36u
.param winvn=0.6u winvp=1.2u lmin=0.18u

.subckt DYN_NAND3_LONG VDD VSS CLK A B C X OUT
MPRE  X   CLK VDD VDD pch W={wpre}  L={lmin}
MKEEP X   OUT VDD VDD pch W={wkeep} L={lkeep}
MA    X   A   n1  VSS nch W={wn}    L={lmin}
MB    n1  B   n2  VSS nch W={wn}    L={lmin}
MC    n2  C   n3  VSS nch W={wn}    L={lmin}
MFOOT n3  CLK VSS VSS nch W={wfoot} L={lmin}
MINVN OUT X   VSS VSS nch W={winvn} L={lmin}
MINVP OUT X   VDD VDD pch W={winvp} L={lmin}
CWX   X   VSS 1.3f
.ends DYN_NAND3_LONG
