namespace Strayspot.Scoring.Reduction;

/// <summary>Optional per-pixel maps of a reduction; the predicted class and the max logit are always produced.</summary>
[Flags]
public enum ReductionOutputs
{
    None = 0,
    /// <summary>Maximum softmax probability.</summary>
    Msp = 1,
    /// <summary>Entropy of the softmax distribution, in nats.</summary>
    Entropy = 2,
    /// <summary>Free energy, −T·logsumexp(l/T).</summary>
    Energy = 4,
}
