namespace VectorKit.Quantization;

/// <summary>An orthogonal rotation a <see cref="ProductQuantizer"/> applies to vectors before cutting them into sub-spaces.</summary>
public enum SubspaceRotation
{
    /// <summary>No rotation: sub-space m holds components <c>m·s .. m·s + s − 1</c> of the vector as given.</summary>
    None = 0,

    /// <summary>
    /// A rotation learnt from the training rows that balances the variance between sub-spaces: the principal directions
    /// of the training rows (eigenvectors of their covariance) are dealt out to the sub-spaces so that the product of
    /// eigenvalues is about equal in every sub-space — the parametric solution of optimised product quantization (Ge,
    /// He, Ke &amp; Sun, CVPR 2013, "eigenvalue allocation"). It helps when variance is concentrated in a few components
    /// or unevenly spread across the components' natural order (images, some embeddings); it costs one
    /// <c>dimension × dimension</c> matrix-vector product per encoded vector and per query.
    /// </summary>
    VarianceBalanced = 1,
}
