# Compares two muarc files with h5py (an outside reader): every dataset
# bit for bit and every attribute, outside /provenance; the second file's
# history must be the first's plus one step. Prints the differences.
import h5py, numpy as np, sys
a=h5py.File(sys.argv[1],'r'); b=h5py.File(sys.argv[2],'r')
diffs=[]
def walk(name, obj):
    if name.startswith('provenance'): return
    if name not in b: diffs.append('missing in B: '+name); return
    o2=b[name]
    for k,v in obj.attrs.items():
        if k not in o2.attrs: diffs.append(f'attr missing {name}@{k}'); continue
        v2=o2.attrs[k]
        if not (np.array_equal(np.asarray(v),np.asarray(v2)) or (np.asarray(v).dtype.kind=='f' and np.array_equal(np.asarray(v),np.asarray(v2),equal_nan=True))):
            diffs.append(f'attr {name}@{k}: {v!r} vs {v2!r}')
    for k in o2.attrs:
        if k not in obj.attrs: diffs.append(f'attr extra in B {name}@{k}')
    if isinstance(obj,h5py.Dataset):
        x=obj[()]; y=o2[()]
        if obj.dtype!=o2.dtype: diffs.append(f'dtype {name}: {obj.dtype} vs {o2.dtype}')
        elif x.shape!=y.shape: diffs.append(f'shape {name}')
        elif x.dtype.kind in 'fiu' and x.tobytes()!=y.tobytes(): diffs.append(f'bytes differ {name}')
        elif x.dtype.kind not in 'fiu' and not np.array_equal(x,y): diffs.append(f'values differ {name}')
a.visititems(walk)
def walk2(name,obj):
    if not name.startswith('provenance') and name not in a: diffs.append('extra in B: '+name)
b.visititems(walk2)
ha=a['provenance/history']; hb=b['provenance/history']
for k in ha:
    x=ha[k][()]; y=hb[k][()]
    if len(y)!=len(x)+1 or not np.array_equal(x,y[:len(x)]): diffs.append('history '+k)
print('\n'.join(diffs[:40])); print(len(diffs),'differences')
