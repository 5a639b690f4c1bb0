import sys, time
sys.path[:0]=['/work/wt-issue11','/work/wt-issue11/tests/helpers','/work/wt-issue11/tests/bench']
import bench_simulate as b
from extract.techfile import load_tech
from extract.netlist.reader import read_schematic
from analyze.search.analysis import analyse_circuit, evaluate_pattern
from analyze.simulate.run import simulate_stage
from analyze.search.cases import input_levels, top_inputs, low_in_precharge
from analyze.physics.device_tables import stage_tables
from analyze.physics.device_charge import gate_levels, final_voltage_with_devices, table_devices, clock_setup
corner = sys.argv[1]
tech = load_tech(f'/tmp/fit/fit.{corner}.toml')
for name,(ports,devs,caps) in b.stages().items():
    if sys.argv[2:] and name not in sys.argv[2:]: continue
    p=f'/tmp/fit/{name}.sp'; open(p,'w').write(b.netlist(name,ports,devs,caps))
    c=read_schematic(p,tech); _,res=analyse_circuit(c,tech); r=res[0]; st=r.stage
    vdd=tech.vdd
    sims=simulate_stage(c,r,tech,None,[corner],count=3)
    lv={}
    for d in table_devices(c,st):
        lv.setdefault(d.name,set()).update({0.0,vdd, vdd-abs(tech.mos[d.type].vt0), abs(tech.mos[d.type].vt0)})
    tops=[d.name for d in table_devices(c,st) if st.dynamic_node in (d.drain,d.source) and d.name in st.evaluation]
    tb=stage_tables(c,st,tech,lv,corner,passes=tops,clock=clock_setup(c,st,tech))
    vm=max(tb.thresholds.values()) if st.polarity=='n' else min(tb.thresholds.values())
    for s in sims:
        wc=evaluate_pattern(c,st,tech,s.inputs)
        if wc is None: continue
        late = set(st.inputs) if s.case=='rising' else (top_inputs(c,st)|low_in_precharge(st,None))
        if not st.footed: late=set(st.inputs)
        levels=gate_levels(c,st,tech,s.inputs,late)
        group=[st.dynamic_node]+list(wc.shared_nodes)
        n=st.polarity=='n'
        on = vdd if n else 0.0
        reset = {d.name: (on if d.gate in st.inputs else levels.after[d.name]) for d in table_devices(c,st)}
        pre = {d.name: levels.before[d.name] for d in table_devices(c,st)}
        for d in table_devices(c,st):
            if d.gate == st.clock: reset[d.name]= (vdd if n else 0.0); pre[d.name]= (0.0 if n else vdd)
        pv = {}
        start={g: pv.get(g, 0.0 if n else vdd) for g in group}; start[st.dynamic_node]= vdd if n else 0.0
        on=[d for d in tops if s.inputs.get(c.device(d).gate,0)==(1 if n else 0)]
        vr=final_voltage_with_devices(c,st,tech,tb,group,levels,start,passes=on)
        vs = s.v_min_without_keeper if s.v_min_without_keeper is not None else s.v_min
        print(f"{name:8} {s.case:8} {' '.join(f'{k}={v}' for k,v in sorted(s.inputs.items())):36} lumped {wc.v_final:.3f} refined {vr:.3f} sim {vs:.3f} d_lump {wc.v_final-vs:+.3f} d_ref {vr-vs:+.3f} | vm {vm:.3f} sim {s.threshold_v:.3f}")
