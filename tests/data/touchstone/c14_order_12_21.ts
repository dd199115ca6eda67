! Edge case 14: [Two-Port Data Order] 12_21 = 11 12 21 22
[Version] 2.0
# GHz S RI R 50
[Number of Ports] 2
[Two-Port Data Order] 12_21
[Number of Frequencies] 2
[Network Data]
1.0  0.1 0.01  0.12 0.012  0.21 0.021  0.2 0.02
2.0  0.3 0.03  0.32 0.032  0.41 0.041  0.4 0.04
[End]
