! Edge case 15: 4-port, symmetric, [Matrix Format] Upper; [Reference] runs over two lines
[Version] 2.0
# GHz S RI R 50
[Number of Ports] 4
[Number of Frequencies] 1
[Reference] 50 75
 25.5
   100
[Matrix Format] Upper
[Network Data]
2.45 0.11 -0.011  0.12 -0.012  0.13 -0.013  0.14 -0.014
     0.22 -0.022  0.23 -0.023  0.24 -0.024
     0.33 -0.033  0.34 -0.034
     0.44 -0.044
[End]
